"""Tally + R_K for N integer labels, K classes, 5 folds: foldcorr vs scikit-learn vs bare numpy.

Run: python tests/bench/bench_tally.py [--quick]
"""

from __future__ import annotations

import sys

import numpy as np
from _timing import best_of




def make_data(n, k, folds, seed=0):
    rng = np.random.default_rng(seed)
    truth = rng.integers(0, k, n)
    noise = rng.integers(0, k, n)
    pred = np.where(rng.random(n) < 0.7, truth, noise)
    fold = rng.integers(0, folds, n)
    return truth, pred, fold


def run(quick: bool = False) -> dict:
    """Time the three ways and print the ratios; return the figures."""
    import foldcorr as fc
    from sklearn.metrics import confusion_matrix, matthews_corrcoef

    n, k, folds = (200_000, 100, 5) if quick else (10_000_000, 1000, 5)
    repeat = 1 if quick else 3
    truth, pred, fold = make_data(n, k, folds)

    def ours():
        t = fc.tally(truth, pred, folds=fold)
        return fc.rk(t), fc.rk(fc.pool(t))

    def ours_hashing():  # labels outside the small-integer range go through factorisation
        t = fc.tally(truth + 10**6, pred + 10**6, folds=fold)
        return fc.rk(t)

    def bare_numpy():
        index = (fold * k + truth) * k + pred
        counts = np.bincount(index, minlength=folds * k * k).reshape(folds, k, k)
        c = counts.astype(np.float64)
        s = c.sum(axis=(1, 2))
        tk, pk = c.sum(axis=2), c.sum(axis=1)
        trace = np.trace(c, axis1=1, axis2=2)
        return (trace * s - (tk * pk).sum(1)) / np.sqrt((s**2 - (tk**2).sum(1)) * (s**2 - (pk**2).sum(1)))

    def reference():
        labels = np.arange(k)
        out = []
        for f in range(folds):
            keep = fold == f
            confusion_matrix(truth[keep], pred[keep], labels=labels)
            out.append(matthews_corrcoef(truth[keep], pred[keep]))
        return np.array(out)

    fc.rk(fc.tally(truth[:1000], pred[:1000], folds=fold[:1000]))  # warm up imports
    t_ours, (per_fold, _) = best_of(ours, repeat)
    t_hash, _ = best_of(ours_hashing, repeat)
    t_numpy, numpy_rk = best_of(bare_numpy, repeat)
    t_ref, ref_rk = best_of(reference, 1)
    agree = float(np.max(np.abs(per_fold.values - ref_rk)))
    assert agree < 1e-10 and np.allclose(per_fold.values, numpy_rk)
    figures = {
        "n": n, "k": k, "folds": folds,
        "ours_s": t_ours, "ours_hashing_s": t_hash, "numpy_s": t_numpy, "reference_s": t_ref,
        "speedup_vs_reference": t_ref / t_ours, "ratio_to_numpy": t_ours / t_numpy,
        "max_abs_difference": agree,
    }
    print(f"tally+R_K N={n:.0e} K={k} folds={folds}: ours {t_ours:.3f} s, "
          f"reference {t_ref:.3f} s, ratio {t_ref / t_ours:.0f}x faster")
    print(f"tally+R_K vs bare numpy bincount pass: ours {t_ours:.3f} s, numpy {t_numpy:.3f} s, "
          f"ratio {t_ours / t_numpy:.2f}x of numpy")
    print(f"tally+R_K hashing path (labels offset by 10^6): {t_hash:.3f} s, "
          f"{t_hash / t_ours:.1f}x the small-integer path")
    return figures


if __name__ == "__main__":
    run(quick="--quick" in sys.argv)

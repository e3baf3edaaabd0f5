"""Score sweeps and the multilabel tally against np.sort, a naive loop and scikit-learn.

Run: python tests/bench/bench_sweep.py [--quick]

1. ``sweep`` of N scores (every distinct threshold, TP/FP and MCC at each, best
   threshold) against ``np.sort`` and ``np.argsort`` of the same array (target:
   within 3x of ``np.sort``), and with 5 folds (the cross-fold choice added);
2. the same against a naive per-threshold loop (``score >= t`` and four counts per
   threshold, numpy), timed on 100 thresholds and extrapolated to all of them, and
   against ``sklearn.metrics.matthews_corrcoef`` per threshold, timed on a few;
3. ``multilabel_tally`` of N x L indicators against
   ``sklearn.metrics.multilabel_confusion_matrix`` (results checked equal).
"""

from __future__ import annotations

import sys
import time

import numpy as np
from _timing import best_of




def _side_by_side(fns: dict, repeat: int) -> dict:
    """Best time of each function, running them in turns so that each round sees the same load."""
    times = {k: [] for k in fns}
    outs = {}
    for _ in range(repeat):
        for k, fn in fns.items():
            outs[k] = None  # free the previous round's output before timing again
            start = time.perf_counter()
            outs[k] = fn()
            times[k].append(time.perf_counter() - start)
    return {k: min(v) for k, v in times.items()}, outs


def run(quick: bool = False) -> dict:
    """Time the sweep and the multilabel tally; print the ratios; return the figures."""
    from sklearn.metrics import matthews_corrcoef, multilabel_confusion_matrix

    from foldcorr.tensor import multilabel_tally
    from foldcorr.analysis.thresholds import sweep

    n = 200_000 if quick else 10_000_000
    n_ml, n_labels = (20_000, 50) if quick else (1_000_000, 500)
    repeat = 1 if quick else 3
    rng = np.random.default_rng(0)
    truth = rng.random(n) < 0.3
    scores = rng.random(n) + 0.3 * truth  # continuous: about n distinct thresholds

    sweep(truth[:1000], scores[:1000])  # warm up imports
    best, outs = _side_by_side({"sort": lambda: np.sort(scores),
                                "argsort": lambda: np.argsort(scores),
                                "sweep": lambda: sweep(truth, scores)}, 1 if quick else 5)
    t_sort, t_argsort, t_sweep, result = best["sort"], best["argsort"], best["sweep"], outs["sweep"]
    n_thr = result.labels[0].n_thresholds
    folds = rng.integers(0, 5, n)
    t_folds, _ = best_of(lambda: sweep(truth, scores, folds=folds), 1)

    probe = np.quantile(scores, np.linspace(0.01, 0.99, 100))

    def naive():
        out = np.empty(probe.size)
        pos = int(truth.sum())
        for i, theta in enumerate(probe):
            pred = scores >= theta
            tp = int(np.count_nonzero(pred & truth))
            pp = int(np.count_nonzero(pred))
            fp, fn = pp - tp, pos - tp
            tn = n - tp - fp - fn
            den = np.sqrt(float(tp + fp) * (tp + fn) * (tn + fp) * (tn + fn))
            out[i] = (tp * tn - fp * fn) / den if den else 0.0
        return out

    t_naive100, naive_mcc = best_of(naive, 1)
    t_naive_all = t_naive100 / probe.size * n_thr
    few = probe[::33]
    t_ref_few, ref_mcc = best_of(lambda: [matthews_corrcoef(truth, scores >= th) for th in few], 1)
    t_ref_all = t_ref_few / few.size * n_thr
    # the sweep's MCC at the probe thresholds equals the naive loop's and the reference's
    curve = result.labels[0].curve
    at = np.searchsorted(curve["threshold"].values, probe)
    assert np.allclose(curve["mcc"].values[at], naive_mcc, atol=1e-12)
    assert np.allclose(curve["mcc"].values[at][::33], ref_mcc, atol=1e-12)

    ml_truth = rng.random((n_ml, n_labels)) < np.linspace(0.005, 0.3, n_labels)
    ml_pred = ml_truth ^ (rng.random((n_ml, n_labels)) < 0.02)
    t_ml, tensor = best_of(lambda: multilabel_tally(ml_truth, ml_pred), repeat)
    t_ml_ref, ref = best_of(lambda: multilabel_confusion_matrix(ml_truth, ml_pred), 1)
    assert np.array_equal(tensor.values, ref)

    figures = {
        "n": n, "n_thresholds": n_thr, "sweep_s": t_sweep, "np_sort_s": t_sort,
        "sweep_over_sort": t_sweep / t_sort, "np_argsort_s": t_argsort,
        "sweep_over_argsort": t_sweep / t_argsort,
        "sweep_5_folds_s": t_folds, "sweep_5_folds_over_sort": t_folds / t_sort,
        "naive_100_thresholds_s": t_naive100, "naive_all_thresholds_s_extrapolated": t_naive_all,
        "speedup_vs_naive": t_naive_all / t_sweep,
        "reference_per_threshold_s": t_ref_few / few.size,
        "reference_all_thresholds_s_extrapolated": t_ref_all,
        "speedup_vs_reference": t_ref_all / t_sweep,
        "multilabel_n": n_ml, "multilabel_labels": n_labels, "multilabel_tally_s": t_ml,
        "multilabel_reference_s": t_ml_ref, "multilabel_speedup": t_ml_ref / t_ml,
    }
    print(f"sweep N={n:.0e} ({n_thr} thresholds) vs np.sort: ours {t_sweep:.3f} s, "
          f"reference {t_sort:.3f} s, ratio {t_sweep / t_sort:.1f}x of np.sort")
    print(f"sweep N={n:.0e} vs np.argsort (where a sort-and-cumulate sweep usually starts): "
          f"ours {t_sweep:.3f} s, reference {t_argsort:.3f} s, "
          f"ratio {t_sweep / t_argsort:.2f}x of np.argsort")
    print(f"sweep N={n:.0e} with 5 folds (cross-fold choice) vs np.sort: ours {t_folds:.3f} s, "
          f"reference {t_sort:.3f} s, ratio {t_folds / t_sort:.1f}x of np.sort")
    print(f"sweep N={n:.0e} vs naive numpy loop (100 thresholds {t_naive100:.2f} s, extrapolated "
          f"to {n_thr}): ours {t_sweep:.3f} s, reference {t_naive_all:.0f} s, "
          f"ratio {t_naive_all / t_sweep:.0f}x faster")
    print(f"sweep N={n:.0e} vs sklearn matthews_corrcoef per threshold ({few.size} timed, "
          f"extrapolated): ours {t_sweep:.3f} s, reference {t_ref_all:.0f} s, "
          f"ratio {t_ref_all / t_sweep:.0f}x faster")
    print(f"multilabel tally N={n_ml:.0e} x {n_labels} labels vs multilabel_confusion_matrix: "
          f"ours {t_ml:.3f} s, reference {t_ml_ref:.3f} s, ratio {t_ml_ref / t_ml:.1f}x faster")
    return figures


if __name__ == "__main__":
    run(quick="--quick" in sys.argv)

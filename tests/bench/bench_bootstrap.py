"""Benchmark: cell-level bootstrap and paired comparison against per-sample resampling.

The reference resamples sample indices with replacement and scores each
resample with ``sklearn.metrics.matthews_corrcoef`` (R_K for K > 2). At
N = 10^6 one reference resample takes a noticeable fraction of a second, so the
reference is timed on a few resamples and extrapolated linearly to B; every
line that does so says it. Both sides run in the same process on the same data.

Run ``python tests/bench/bench_bootstrap.py`` (full size: B = 1000, N = 10^6,
K = 100) or call ``run(quick=True)`` (seconds).
"""

from __future__ import annotations

import json
import sys

import numpy as np
from _timing import best_of
from sklearn.metrics import matthews_corrcoef

import foldcorr as fc
from foldcorr.tensor import tally  # the package attribute `tally` can be the module


def _data(rng, n, k, accuracy):
    prevalence = 1.0 / np.arange(1, k + 1) ** 0.7
    prevalence /= prevalence.sum()
    truth = rng.choice(k, size=n, p=prevalence)
    def model(acc):
        return np.where(rng.random(n) < acc, truth, rng.integers(0, k, n))
    return truth, model(accuracy), model(accuracy + 0.03)



def _line(what, ours, ref, note=""):
    ratio = ref / ours if ours > 0 else float("inf")
    print(f"{what}: ours {ours:.3f} s, reference {ref:.3g} s{note}, ratio {ratio:.0f}x")
    return ratio


def run(quick: bool = False) -> dict:
    """Time the bootstrap and the paired comparison; print ratios; return the figures."""
    n, k, b, few = (20_000, 20, 200, 3) if quick else (1_000_000, 100, 1000, 5)
    rng = np.random.default_rng(20261201)
    truth, pred_a, pred_b = _data(rng, n, k, 0.8)
    folds = np.arange(n) % 5
    out = {"n": n, "k": k, "resamples": b, "reference_resamples_timed": few}

    t_tally, t = best_of(lambda: tally(truth, pred_a))
    out["tally_s"] = t_tally
    nnz = int((t.values > 0).sum())
    out["nonzero_cells"] = nnz
    print(f"data: N={n}, K={k}, B={b}, {nnz} nonzero cells; tally {t_tally:.3f} s")

    ours, res = best_of(lambda: fc.bootstrap(t, n_resamples=b, seed=1))
    def reference_boot():
        r = np.random.default_rng(2)
        for _ in range(few):
            idx = r.integers(0, n, n)
            matthews_corrcoef(truth[idx], pred_a[idx])
    per, _ = best_of(reference_boot)
    ref = per / few * b
    note = f" (extrapolated from {few} resamples)"
    out["bootstrap"] = {"ours_s": ours, "reference_s": ref, "extrapolated": True,
                        "ratio": _line(f"percentile bootstrap of R_K, B={b}", ours, ref, note),
                        "interval": [float(res.low), float(res.high)]}

    tf = tally(truth, pred_a, folds=folds)
    ours_f, _ = best_of(lambda: fc.bootstrap(tf, n_resamples=b, seed=1))
    def reference_strat():
        r = np.random.default_rng(3)
        groups = [np.flatnonzero(folds == f) for f in range(5)]
        for _ in range(few):
            idx = np.concatenate([g[r.integers(0, len(g), len(g))] for g in groups])
            matthews_corrcoef(truth[idx], pred_a[idx])
    per, _ = best_of(reference_strat)
    ref = per / few * b
    out["stratified"] = {"ours_s": ours_f, "reference_s": ref, "extrapolated": True,
                         "ratio": _line(f"stratified (5 folds) bootstrap of pooled R_K, B={b}",
                                        ours_f, ref, note)}

    ours_bca, res_bca = best_of(lambda: fc.bootstrap(t, n_resamples=b, seed=1, method="bca"))
    out["bca"] = {"ours_s": ours_bca, "interval": [float(res_bca.low), float(res_bca.high)]}
    print(f"BCa bootstrap of R_K, B={b} (jackknife over {nnz} cells): ours {ours_bca:.3f} s "
          f"(per-sample jackknife would need {n} statistic evaluations; not timed)")

    ours_mcc, _ = best_of(lambda: fc.bootstrap(t, fc.ovr_mcc, n_resamples=b, seed=1))
    print(f"percentile bootstrap of all {k} one-vs-rest MCC, B={b}: ours {ours_mcc:.3f} s")
    out["ovr_mcc_s"] = ours_mcc

    joint_s, joint = best_of(lambda: fc.joint_tally(truth, pred_a, pred_b, folds=folds))
    ours_c, cmp = best_of(lambda: fc.compare_models(joint, n_resamples=b, seed=4))
    def reference_pair():
        r = np.random.default_rng(5)
        for _ in range(few):
            idx = r.integers(0, n, n)
            y = truth[idx]
            matthews_corrcoef(y, pred_b[idx]) - matthews_corrcoef(y, pred_a[idx])
            swap = r.random(n) < 0.5
            a2, b2 = np.where(swap, pred_b, pred_a), np.where(swap, pred_a, pred_b)
            matthews_corrcoef(truth, b2) - matthews_corrcoef(truth, a2)
    per, _ = best_of(reference_pair)
    ref = per / few * b
    out["compare"] = {
        "joint_tally_s": joint_s, "ours_s": ours_c, "reference_s": ref, "extrapolated": True,
        "ratio": _line(f"paired comparison (bootstrap + permutations, B={b} each)", ours_c, ref,
                       note),
        "difference": cmp.difference, "ci": list(cmp.ci), "p_value": cmp.p_value,
        "joint_nonzero_cells": int((joint.values > 0).sum()),
    }
    print(f"joint tally of {n} samples into {k}^3 cells x 5 folds: {joint_s:.3f} s; "
          f"{out['compare']['joint_nonzero_cells']} nonzero joint cells")
    return out


if __name__ == "__main__":
    figures = run(quick="--quick" in sys.argv)
    if "--json" in sys.argv:
        print(json.dumps(figures, indent=2))

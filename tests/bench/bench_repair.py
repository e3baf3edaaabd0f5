"""Benchmark: all K^2 pair repair gains in one O(K^2) pass against a naive recompute.

The reference recomputes R_K from scratch (bare numpy, O(K^2)) after moving each
sampled confusion cell to the diagonal; its time per pair is measured on a random
sample of pairs and extrapolated to all K(K - 1) pairs. Class repairs (fix false
negatives, false positives, both) and leave-class-out are measured the same way
against K naive recomputes. Values are compared on the sampled pairs and classes.

    python tests/bench/bench_repair.py
"""

from __future__ import annotations

import json
import time

import numpy as np
from _timing import best_of

from foldcorr.analysis.gains import class_gains, leave_class_out, pair_gains
from foldcorr.tensor import confusion_tensor


def _rk(cells: np.ndarray) -> float:
    """R_K of one matrix from scratch (Gorodkin 2004), bare numpy."""
    s = cells.sum()
    t, p = cells.sum(axis=1), cells.sum(axis=0)
    num = np.trace(cells) * s - t @ p
    den = np.sqrt(s * s - p @ p) * np.sqrt(s * s - t @ t)
    return float(num / den) if den > 0 else 0.0




def _line(what: str, ours: float, ref: float, note: str = "") -> None:
    print(f"{what}: ours {ours:.3f} s, reference {ref:.2f} s{note}, ratio {ref / ours:.0f}x")


def run(quick: bool = False) -> dict:
    """Time the repair analyses; print one line per analysis and return the figures."""
    k = 300 if quick else 2000
    sampled_pairs = 30 if quick else 300
    sampled_classes = 10 if quick else 40
    rng = np.random.default_rng(2026)
    cells = rng.poisson(3.0, (k, k)) + np.diag(rng.integers(200, 2000, k))
    t = confusion_tensor(cells, list(range(k)))
    dense = cells.astype(np.float64)
    base = _rk(dense)
    results: dict = {"k": k, "n": int(cells.sum())}

    # --- all pair gains
    ours, gains = best_of(lambda: pair_gains(t).values, 3)
    rows = rng.integers(0, k, sampled_pairs)
    cols = (rows + rng.integers(1, k, sampled_pairs)) % k  # off-diagonal
    work = dense.copy()
    start = time.perf_counter()
    naive = []
    for i, j in zip(rows, cols):
        m = work[i, j]
        work[i, i] += m
        work[i, j] = 0.0
        naive.append(_rk(work) - base)
        work[i, j] = m
        work[i, i] -= m
    per_pair = (time.perf_counter() - start) / sampled_pairs
    reference = per_pair * k * (k - 1)
    diff = float(np.max(np.abs(gains[rows, cols] - np.array(naive))))
    _line(f"all {k * (k - 1)} pair gains, K={k}", ours, reference,
          f" (extrapolated from {sampled_pairs} pairs)")
    results["pair_gains"] = {"ours_s": ours, "reference_s": reference,
                             "reference_per_pair_s": per_pair, "sampled": sampled_pairs,
                             "ratio": reference / ours, "max_abs_diff": diff}

    # --- class gains (three repairs per class) and leave-class-out
    picks = rng.choice(k, sampled_classes, replace=False)
    for name, fn, naive_one in (
        ("class_gains", lambda: class_gains(t).gain_fix_both.values, _fix_both),
        ("leave_class_out", lambda: leave_class_out(t).values, _without),
    ):
        ours, values = best_of(fn, 3)
        start = time.perf_counter()
        naive = [naive_one(dense, c) - base for c in picks]
        per_class = (time.perf_counter() - start) / sampled_classes
        reference = per_class * k
        diff = float(np.max(np.abs(values[picks] - np.array(naive))))
        _line(f"{name} for all {k} classes", ours, reference,
              f" (extrapolated from {sampled_classes} classes)")
        results[name] = {"ours_s": ours, "reference_s": reference, "sampled": sampled_classes,
                         "ratio": reference / ours, "max_abs_diff": diff}
    return results


def _fix_both(dense: np.ndarray, c: int) -> float:
    fixed = dense.copy()
    home = np.arange(len(fixed))
    column = dense[:, c].copy()
    column[c] = 0.0
    fixed[home, home] += column  # every sample taken for c goes to its own class
    fixed[:, c] = 0.0
    fixed[c, :] = 0.0
    fixed[c, c] = dense[c].sum()  # every sample of c predicted c
    return _rk(fixed)


def _without(dense: np.ndarray, c: int) -> float:
    keep = np.arange(len(dense)) != c
    return _rk(dense[np.ix_(keep, keep)])


if __name__ == "__main__":
    print(json.dumps(run(), indent=2))

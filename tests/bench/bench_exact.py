"""Benchmark: the cost of R_K's exact integer numerator against the float64 path.

R_K takes its numerator c s - sum t_k p_k from Python integers where float64
would lose it (a near-cancelling table, or totals above 2^26). Three tensors of
the same shape (folds x K x K) are timed: ordinary counts (the float64 path
only), counts with totals above 2^26 (the exact path for every fold), and the
same large counts as float64 weights (never exact: scaled sums only). The
ratios say what exactness costs.

    python tests/bench/bench_exact.py
"""

from __future__ import annotations

import json

import numpy as np
from _timing import best_of

from foldcorr.metrics import rk
from foldcorr.tensor import confusion_tensor


def run(quick: bool = False) -> dict:
    """Time R_K on ordinary, large integer and large float tensors; print the ratios."""
    k, folds = (50, 5) if quick else (300, 10)
    rng = np.random.default_rng(2026)
    cells = rng.poisson(3.0, (folds, k, k)) + np.eye(k, dtype=np.int64) * 500
    leading = {"fold": list(range(folds))}
    small = confusion_tensor(cells, list(range(k)), leading=leading)
    large = confusion_tensor(cells * 2**30, list(range(k)), leading=leading)
    weighted = confusion_tensor((cells * 2.0**30).astype(np.float64), list(range(k)),
                                leading=leading)
    fast, a = best_of(lambda: rk(small).values, 5)
    exact, b = best_of(lambda: rk(large).values, 5)
    floats, c = best_of(lambda: rk(weighted).values, 5)
    assert np.allclose(a, b) and np.allclose(a, c)
    print(f"R_K of {folds} folds x K = {k}: float64 path {fast * 1e3:.2f} ms, exact numerator "
          f"{exact * 1e3:.2f} ms ({exact / fast:.1f}x), large float weights "
          f"{floats * 1e3:.2f} ms ({floats / fast:.1f}x)")
    return {"k": k, "folds": folds, "float_s": fast, "exact_s": exact, "weights_s": floats,
            "exact_ratio": exact / fast}


if __name__ == "__main__":
    print(json.dumps(run(), indent=2))

"""Reading a saved evaluation vs re-tallying the prediction table it came from.

A CI gate that reads the baseline's saved tensor skips reading and counting the baseline's
predictions. Ours: ``load_saved`` of the NetCDF-4 file, then ``evaluate``. Reference: read the
CSV with pandas and count it with scikit-learn's ``confusion_matrix`` fold by fold, then
``evaluate`` the same tensor. Also prints the file sizes.

Run: python tests/bench/bench_saved.py [--quick]
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import numpy as np
from _timing import best_of




def run(quick: bool = False) -> dict:
    """Time both ways and print the ratio; return the figures."""
    import pandas as pd
    from sklearn.metrics import confusion_matrix

    from foldcorr.evaluation import evaluate
    from foldcorr.sources.saved import load_saved, save_evaluation
    from foldcorr.sources import load_tensor
    from foldcorr.tensor import confusion_tensor

    n, k, folds = (50_000, 50, 5) if quick else (2_000_000, 200, 5)
    repeat = 1 if quick else 3
    rng = np.random.default_rng(0)
    truth = rng.integers(0, k, n)
    pred = np.where(rng.random(n) < 0.7, truth, rng.integers(0, k, n))
    names = np.array([f"taxon{i:04d}" for i in range(k)])
    folder = Path(tempfile.mkdtemp(prefix="foldcorr-bench-"))
    csv = folder / "predictions.csv"
    pd.DataFrame({"actual": names[truth], "predicted": names[pred],
                  "fold": rng.integers(1, folds + 1, n)}).to_csv(csv, index=False)
    nc = folder / "run.nc"
    t_save, _ = best_of(lambda: save_evaluation(nc, load_tensor(csv)), 1)

    def ours():
        return evaluate(load_saved(nc).tensor)

    def reference():
        df = pd.read_csv(csv)
        labels = sorted(set(df.actual) | set(df.predicted))
        fold_labels = sorted(df.fold.unique())
        counts = np.stack([confusion_matrix(g.actual, g.predicted, labels=labels)
                           for _, g in df.groupby("fold", sort=True)])
        return evaluate(confusion_tensor(counts, labels, leading={"fold": fold_labels}))

    t_ours, ev_ours = best_of(ours, repeat)
    t_ref, ev_ref = best_of(reference, repeat)
    assert np.array_equal(ev_ours.tensor.values, ev_ref.tensor.values)
    assert abs(ev_ours.rk - ev_ref.rk) < 1e-12
    figures = {
        "n": n, "k": k, "folds": folds, "save_s": t_save,
        "ours_s": t_ours, "reference_s": t_ref, "speedup_vs_reference": t_ref / t_ours,
        "csv_bytes": csv.stat().st_size, "nc_bytes": nc.stat().st_size,
    }
    print(f"evaluate a saved run N={n:.0e} K={k} folds={folds}: ours {t_ours:.3f} s, "
          f"reference {t_ref:.3f} s, ratio {t_ref / t_ours:.0f}x")
    print(f"file sizes: predictions CSV {figures['csv_bytes'] / 1e6:.1f} MB, saved tensor "
          f"{figures['nc_bytes'] / 1e6:.3f} MB; saving took {t_save:.3f} s")
    return figures


if __name__ == "__main__":
    run(quick="--quick" in sys.argv)

"""Many classes: tally + evaluate at K up to 100,000, N = 1e6, 5 folds, with peak memory.

Side by side in one run, per K: foldcorr's default path (dense cells while
folds x K^2 is small, sparse above), the dense path forced, the sparse path
forced, scikit-learn's ``matthews_corrcoef`` (pooled R_K only, where its dense
K x K matrix fits) and the floor: numpy alone counting the codes
(``bincount`` for small K, ``unique`` for large K) and R_K per fold from the
margins. Peak memory is traced with ``tracemalloc`` (numpy reports its arrays
to it).

Files end to end (``run_files``): a Parquet file of text labels (N = 2e6,
K = 20,000, 5 folds) read and tallied by ``foldcorr.load`` then evaluated, each
in a fresh child process, against the floor: a child that imports pandas,
pyarrow, xarray and rich, reads the same columns with Arrow, dictionary-codes
them and counts the distinct cells. Peak memory is each child's maximum RSS
(``resource.getrusage`` in the child).

Run: python tests/bench/bench_many_classes.py [--quick]
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import time
import tracemalloc
import warnings

import numpy as np
from _timing import best_of

FOLDS = 5
MIB = 1024 * 1024


def make_data(n, k, seed=0):
    rng = np.random.default_rng(seed)
    truth = rng.integers(0, k, n)
    pred = np.where(rng.random(n) < 0.7, truth, rng.integers(0, k, n))
    return truth, pred, rng.integers(0, FOLDS, n)


def traced(fn, repeat):
    """Best wall time of ``repeat`` calls and the peak traced memory of one call, in MiB."""
    seconds, _ = best_of(fn, repeat)
    tracemalloc.start()
    fn()
    peak = tracemalloc.get_traced_memory()[1] / MIB
    tracemalloc.stop()
    return seconds, peak


def floor_rk(truth, pred, fold, k):
    """R_K per fold from the codes with numpy alone (Gorodkin 2004 from margins)."""
    lead = fold * k
    if FOLDS * k * k <= 1 << 23:
        cells = np.bincount((lead + truth) * k + pred, minlength=FOLDS * k * k)
        trace = cells.reshape(FOLDS, k, k).trace(axis1=1, axis2=2).astype(float)
    else:
        codes, counts = np.unique((lead + truth) * k + pred, return_counts=True)
        a, p = (codes // k) % k, codes % k
        trace = np.bincount((codes // (k * k))[a == p], counts[a == p], minlength=FOLDS)
    tk = np.bincount(lead + truth, minlength=FOLDS * k).reshape(FOLDS, k).astype(float)
    pk = np.bincount(lead + pred, minlength=FOLDS * k).reshape(FOLDS, k).astype(float)
    s = tk.sum(1)
    return (trace * s - (tk * pk).sum(1)) / np.sqrt((s * s - (pk * pk).sum(1))
                                                    * (s * s - (tk * tk).sum(1)))


def run(quick: bool = False) -> dict:
    """Time every path at each K, print the ratios, return the figures."""
    import foldcorr as fc
    from foldcorr.tensor import tally_columns, validate_tensor
    from sklearn.metrics import matthews_corrcoef

    n = 200_000 if quick else 1_000_000
    ks = (10, 100, 1_000, 20_000) if quick else (10, 100, 1_000, 20_000, 100_000)
    repeat = 1 if quick else 3
    warnings.simplefilter("ignore", fc.UndefinedMetricWarning)
    free = fc.tensor.memory_available() or 0
    out = {"n": n, "folds": FOLDS, "rows": []}
    warm = make_data(1000, 3)
    fc.evaluate(fc.tally(*warm[:2], folds=warm[2]))  # imports out of the first timing
    fc.evaluate(tally_columns({"actual": ("t", warm[0]), "predicted": ("p", warm[1])},
                              sparse_above=0))
    for k in ks:
        truth, pred, fold = make_data(n, k)

        def path(sparse_above):
            def go():
                t = tally_columns({"actual": ("truth", truth), "predicted": ("pred", pred)},
                                  leading={"fold": fold}, sparse_above=sparse_above)
                return fc.evaluate(validate_tensor(t))
            return go

        def default():
            return fc.evaluate(fc.tally(truth, pred, folds=fold))

        row = {"k": k}
        row["ours_s"], row["ours_mib"] = traced(default, repeat)
        row["floor_s"], row["floor_mib"] = traced(lambda: floor_rk(truth, pred, fold, k), repeat)
        dense_bytes = FOLDS * k * k * 8
        if dense_bytes < min(2 * 1024 * MIB, free / 4):
            row["dense_s"], row["dense_mib"] = traced(path(None), repeat)
        row["sparse_s"], row["sparse_mib"] = traced(path(0), repeat)
        if k * k * 8 < min(1024 * MIB, free / 8):
            row["sklearn_s"], row["sklearn_mib"] = traced(
                lambda: matthews_corrcoef(truth, pred), 1)
        ours = default()
        row["rk_matches_floor"] = bool(np.allclose(ours.folds["rk"].values,
                                                   floor_rk(truth, pred, fold, k)))
        out["rows"].append(row)
        parts = [f"K={k:>6}: ours {row['ours_s']:.3f} s {row['ours_mib']:.0f} MiB"]
        for name in ("dense", "sparse", "sklearn", "floor"):
            if f"{name}_s" in row:
                parts.append(f"{name} {row[name + '_s']:.3f} s {row[name + '_mib']:.0f} MiB "
                             f"(ratio {row[name + '_s'] / row['ours_s']:.2f}x)")
        print(", ".join(parts) + f"; R_K equals the floor's: {row['rk_matches_floor']}")
    out["files"] = run_files(quick)
    return out


_FLOOR = """
import numpy as np, pandas, pyarrow as pa, pyarrow.compute as pc, pyarrow.parquet as pq
import rich, xarray
table = pq.read_table(PATH, columns=["actual", "predicted", "fold"])
codes = [pc.dictionary_encode(table[c]).combine_chunks().indices.to_numpy().astype(np.int64)
         for c in ("actual", "predicted")]
fold = table["fold"].to_numpy().astype(np.int64)
cells = np.unique((fold << 42) | (codes[0] << 21) | codes[1])
print(len(cells))
"""

_OURS = """
import foldcorr as fc
ev = fc.evaluate(fc.load(PATH))
print(ev.tensor.data.nnz)
"""

_CHILD = """
import resource, sys, time
PATH = sys.argv[1]
start = time.perf_counter()
{body}
print(time.perf_counter() - start, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""


def child(body: str, path) -> tuple[float, float, float]:
    """Wall time of a fresh child running ``body`` (whole process), time inside it, peak MiB."""
    start = time.perf_counter()
    out = subprocess.run([sys.executable, "-c", _CHILD.format(body=body), str(path)],
                         check=True, capture_output=True, text=True).stdout.split()
    return time.perf_counter() - start, float(out[-2]), float(out[-1]) / 1024


def run_files(quick: bool = False) -> dict:
    """Parquet of text labels -> tallied tensor + evaluate, in child processes, vs the floor."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    n, k = (200_000, 20_000) if quick else (2_000_000, 20_000)
    truth, pred, fold = make_data(n, k, seed=1)
    names = np.array([f"class-{i:05d}" for i in range(k)], dtype=object)
    with tempfile.TemporaryDirectory() as tmp:
        path = f"{tmp}/p.parquet"
        pq.write_table(pa.table({"actual": names[truth], "predicted": names[pred],
                                 "fold": fold}), path)
        rows = {}
        for name, body in (("floor", _FLOOR), ("ours", _OURS)):
            runs = [child(body, path) for _ in range(1 if quick else 3)]
            best = min(runs)
            rows[name] = {"s": best[0], "inside_s": best[1], "mib": max(r[2] for r in runs)}
    ratio = rows["ours"]["s"] / rows["floor"]["s"]
    print(f"files K={k} N={n}: ours {rows['ours']['s']:.2f} s {rows['ours']['mib']:.0f} MiB, "
          f"floor {rows['floor']['s']:.2f} s {rows['floor']['mib']:.0f} MiB (ratio {ratio:.2f}x)")
    return {"n": n, "k": k, "folds": FOLDS, **rows, "ratio": ratio}


if __name__ == "__main__":
    if "--files" in sys.argv:   # the files end to end only
        print(json.dumps(run_files(quick="--quick" in sys.argv)))
    else:
        run(quick="--quick" in sys.argv)

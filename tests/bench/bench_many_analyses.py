"""Many classes end to end: score, intervals, comparison and tally, with peak memory.

Every figure is one fresh child process (wall time including start-up; peak
memory the child's maximum RSS), run once, side by side with its reference in
the same run:

- the floor: a child that imports pandas, pyarrow, xarray and rich, reads the
  same columns with Arrow, dictionary-codes them and counts the distinct cells;
- at K = 10 and 100, the same command on the code of an earlier revision
  (``--before REV``: its tree exported with ``git archive``), for regressions.

Targets (``docs/many-classes.md``): ``score`` at K = 20,000, N = 2e6 text
labels within 4x the floor and 1.5 GiB; ``score --ci 0.95 --resamples 1000``
at K = 2,000, N = 1e6 under 2 minutes and 2 GiB; ``compare --resamples 500
--permutations 500`` at K = 5,000, N = 1e6 under 3 minutes and 2 GiB;
K = 100,000 over 1e7 rows with memory O(nnz + folds x K); ``fc.tally`` of 1e7
Arrow-backed text labels (K = 1,000) within 3x the floor.

Run: python tests/bench/bench_many_analyses.py [--quick] [--before REV] [--only NAME,...]
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

FOLDS = 5
MIB = 1024 * 1024

_CHILD = """
import resource, sys, time
PATH = sys.argv[1]
start = time.perf_counter()
{body}
use = resource.getrusage(resource.RUSAGE_SELF)
print(use.ru_utime + use.ru_stime, time.perf_counter() - start, use.ru_maxrss)
"""

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

_TALLY = """
import numpy as np, pandas as pd, pyarrow.parquet as pq
import xarray, rich  # the floor's process imports these too (DESIGN.md)
{setup}
table = pq.read_table(PATH, columns=["actual", "predicted"])
frame = table.to_pandas(types_mapper=pd.ArrowDtype)
start = time.perf_counter()
{work}
print(time.perf_counter() - start)
"""

# the import is outside the timed work on both sides (tests/bench/bench_startup.py measures it)
_TALLY_OURS = """
t = fc.tally(frame["actual"], frame["predicted"])
"""

_TALLY_FLOOR = """
import pyarrow.compute as pc
codes = [pc.dictionary_encode(table[c]).combine_chunks() for c in ("actual", "predicted")]
k = len(codes[1].dictionary)
cells = np.bincount(codes[0].indices.to_numpy().astype(np.int64) * k
                    + codes[1].indices.to_numpy(), minlength=len(codes[0].dictionary) * k)
"""


def child(body: str, path, env=None) -> dict:
    """One fresh child running ``body``: wall seconds, peak MiB, and what it printed."""
    start = time.perf_counter()
    done = subprocess.run([sys.executable, "-c", _CHILD.format(body=body), str(path)],
                          capture_output=True, text=True, env=env)
    seconds = time.perf_counter() - start
    if done.returncode:
        return {"error": done.stderr.strip().splitlines()[-1:] or ["failed"], "s": seconds}
    out = done.stdout.split()
    return {"s": seconds, "cpu_s": float(out[-3]), "inside_s": float(out[-2]),
            "mib": float(out[-1]) / 1024, "printed": out[:-3]}


def cli(argv) -> str:
    return ("import contextlib, io\nfrom foldcorr.cli import main\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            f"    code = main([{', '.join(map(repr, argv[:1]))}, PATH, "
            f"{', '.join(map(repr, argv[1:]))}])\n"
            "assert code == 0, code\n")


def write_labels(path, n, k, *, seed, models=1):
    """A Parquet file of text labels: actual, predicted (or pred_a, pred_b) and fold."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(seed)
    names = pa.array([f"class-{i:06d}" for i in range(k)])
    truth = rng.integers(0, k, n)
    columns = {"actual": names.take(pa.array(truth))}
    for m in range(models):
        pred = np.where(rng.random(n) < 0.7 - 0.05 * m, truth, rng.integers(0, k, n))
        name = "predicted" if models == 1 else f"pred_{'ab'[m]}"
        columns[name] = names.take(pa.array(pred))
    columns["fold"] = pa.array(rng.integers(0, FOLDS, n))
    pq.write_table(pa.table(columns), path, row_group_size=500_000)
    return path


def before_env(rev: str, tmp: str):
    """Environment importing foldcorr from the tree of ``rev`` (``git archive``), or None."""
    root = Path(__file__).resolve().parents[2]
    dest = Path(tmp) / "before"
    dest.mkdir()
    archive = subprocess.run(["git", "-C", str(root), "archive", rev, "foldcorr"],
                             capture_output=True, check=True).stdout
    subprocess.run(["tar", "-x", "-C", str(dest)], input=archive, check=True)
    return {**os.environ, "PYTHONPATH": str(dest)}


def _show(name, row, ref=None):
    if "error" in row:
        print(f"{name}: failed: {row['error'][0]}")
        return
    text = f"{name}: {row['s']:.1f} s wall, {row['cpu_s']:.1f} s CPU, {row['mib']:.0f} MiB"
    if ref is not None and "s" in ref and "error" not in ref:
        text += (f" (ratio to {ref['name']} {row['s'] / ref['s']:.2f}x wall, "
                 f"{row['cpu_s'] / ref['cpu_s']:.2f}x CPU)")
    print(text, flush=True)


def run(quick: bool = False, before: str | None = None, only=None) -> dict:
    """Run every case once (``quick``: small sizes), print the ratios, return the figures."""
    scale = 20 if quick else 1
    cases = {
        "score_k20000": (20_000, 2_000_000 // scale, ["score"]),
        "score_ci_k2000": (2_000, 1_000_000 // scale,
                           ["score", "--ci", "0.95", "--resamples", "1000" if not quick else "100"]),
        "compare_k5000": (5_000, 1_000_000 // scale,
                          ["compare", "--pred-a", "pred_a", "--pred-b", "pred_b", "--resamples",
                           "500" if not quick else "100", "--permutations",
                           "500" if not quick else "100"]),
        "score_k100000": (100_000, 10_000_000 // scale, ["score"]),
        "score_k10": (10, 1_000_000 // scale, ["score"]),
        "score_k100": (100, 1_000_000 // scale, ["score"]),
    }
    out = {"folds": FOLDS, "rows": {}}
    with tempfile.TemporaryDirectory() as tmp:
        env = before_env(before, tmp) if before else None
        for name, (k, n, argv) in cases.items():
            if only and name not in only:
                continue
            models = 2 if argv[0] == "compare" else 1
            path = write_labels(f"{tmp}/{name}.parquet", n, k, seed=k, models=models)
            row = {"k": k, "n": n, "argv": argv}
            floor_body = _FLOOR if models == 1 else _FLOOR.replace('"predicted"', '"pred_a"')
            row["floor"] = {"name": "floor", **child(floor_body, path)}
            row["ours"] = child(cli(argv), path)
            _show(f"{name} floor (K={k}, N={n})", row["floor"])
            _show(f"{name} ours {' '.join(argv)}", row["ours"], row["floor"])
            if env is not None and k <= 100:
                row["before"] = {"name": "before", **child(cli(argv), path, env)}
                _show(f"{name} before ({before})", row["before"])
                if "error" not in row["ours"] and "error" not in row["before"]:
                    print(f"{name}: ours / before {row['ours']['s'] / row['before']['s']:.2f}x")
            out["rows"][name] = row
        if not only or "tally_arrow" in only:
            n = 10_000_000 // scale
            path = write_labels(f"{tmp}/tally.parquet", n, 1_000, seed=3)
            row = {"k": 1_000, "n": n}
            for who, work in (("floor", _TALLY_FLOOR), ("ours", _TALLY_OURS)):
                setup = ("import foldcorr as fc; fc.tally(['a'], ['a'])  # lazy imports done"
                         if who == "ours" else "")
                got = child(_TALLY.format(work=work, setup=setup), path)
                if "error" not in got:
                    got["work_s"] = float(got["printed"][-1])
                row[who] = got
            if "error" not in row["ours"] and "error" not in row["floor"]:
                row["ratio"] = row["ours"]["work_s"] / row["floor"]["work_s"]
                print(f"tally of {n} Arrow-backed text labels, K=1000: ours "
                      f"{row['ours']['work_s']:.2f} s, floor {row['floor']['work_s']:.2f} s "
                      f"(ratio {row['ratio']:.2f}x)")
            out["rows"]["tally_arrow"] = row
    return out


if __name__ == "__main__":
    args = sys.argv[1:]
    rev = args[args.index("--before") + 1] if "--before" in args else None
    names = args[args.index("--only") + 1].split(",") if "--only" in args else None
    print(json.dumps(run(quick="--quick" in args, before=rev, only=names), default=str))

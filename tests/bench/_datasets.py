"""Generated prediction datasets for the benchmarks (invented data, written in chunks)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np


def write_parquet_dataset(folder, *, rows: int, classes: int, folds: int, files: int,
                          chunk: int = 1_000_000, seed: int = 7) -> list[Path]:
    """Write ``rows`` rows over ``files`` Parquet files, ``chunk`` rows at a time.

    Columns ``actual``, ``predicted`` (int32 codes of ``classes`` taxa; 70 %
    correct, the rest uniform) and ``fold`` (1..folds). Memory holds one chunk.
    """
    import pyarrow as pa
    import pyarrow.parquet as pq

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    schema = pa.schema([("actual", pa.int32()), ("predicted", pa.int32()), ("fold", pa.int32())])
    per_file = rows // files
    paths = []
    for i in range(files):
        path = folder / f"part-{i:04d}.parquet"
        with pq.ParquetWriter(path, schema) as writer:
            left = per_file
            while left:
                n = min(chunk, left)
                actual = rng.integers(0, classes, n, dtype=np.int32)
                wrong = rng.random(n) >= 0.7
                predicted = actual.copy()
                predicted[wrong] = rng.integers(0, classes, int(wrong.sum()), dtype=np.int32)
                fold = rng.integers(1, folds + 1, n, dtype=np.int32)
                writer.write_table(pa.table({"actual": actual, "predicted": predicted,
                                             "fold": fold}, schema=schema))
                left -= n
        paths.append(path)
    return paths


def in_child(code: str, **kwargs) -> dict:
    """Run ``code`` in a fresh Python; it defines ``measure(**kwargs) -> dict``.

    Returns that dict plus ``peak_rss_mb`` (the child's maximum resident set).
    """
    program = (code + "\nimport json, resource, sys\n"
               "out = measure(**json.loads(sys.argv[1]))\n"
               "out['peak_rss_mb'] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024\n"
               "print(json.dumps(out))\n")
    run = subprocess.run([sys.executable, "-c", program, json.dumps(kwargs)],
                         capture_output=True, text=True)
    if run.returncode != 0:
        raise RuntimeError(f"benchmark child failed:\n{run.stderr[-2000:]}")
    return json.loads(run.stdout.strip().splitlines()[-1])


__all__ = ["write_parquet_dataset", "in_child"]

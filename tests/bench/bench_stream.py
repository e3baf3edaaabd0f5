"""Streaming a generated Parquet dataset: rows per second, peak memory at two sizes,
and the cost of the tally over a plain pyarrow read of the same columns.

Full size: 10^8 rows, K = 1000 classes, 5 folds, in 10 files of 10^7 rows
(row groups of 10^6), generated in chunks in a temporary folder that is deleted
afterwards. Peak RSS is measured in child processes (one for 10^7 rows, the
first file; one for all 10^8), each after its imports.
"""

from __future__ import annotations

import shutil
import tempfile
import time

from _datasets import in_child, write_parquet_dataset

TALLY = """
import time
from foldcorr.sources.stream import stream_tensor
from foldcorr.tensor import confusion_tensor
confusion_tensor([[1]], ["a"])        # one-time imports (xarray's array backends) before timing
def measure(path):
    start = time.perf_counter()
    result = stream_tensor(path, progress=False)
    seconds = time.perf_counter() - start
    t = result.tensor
    return {"seconds": seconds, "rows": result.rows, "classes": t.sizes["actual"],
            "folds": t.sizes["fold"], "total": int(t.sum())}
"""

READ = """
import time
import pyarrow.dataset as ds
from foldcorr.sources.reading import BATCH_ROWS
def measure(paths):
    start = time.perf_counter()
    rows = 0
    for batch in ds.dataset(paths, format="parquet").to_batches(
            columns=["actual", "predicted", "fold"], batch_size=BATCH_ROWS,
            batch_readahead=1, fragment_readahead=1):
        rows += batch.num_rows
    return {"seconds": time.perf_counter() - start, "rows": rows}
"""


BARE = """
import time
import numpy as np
import pyarrow.dataset as ds
from foldcorr.sources.reading import BATCH_ROWS
def measure(paths, classes, folds):
    counts = np.zeros((folds + 1) * classes * classes, dtype=np.int64)
    start = time.perf_counter()
    for batch in ds.dataset(paths, format="parquet").to_batches(
            columns=["actual", "predicted", "fold"], batch_size=BATCH_ROWS,
            batch_readahead=1, fragment_readahead=1):
        f, a, p = (batch.column(c).to_numpy() for c in ("fold", "actual", "predicted"))
        index = f.astype(np.int64)
        index *= classes
        index += a
        index *= classes
        index += p
        np.add.at(counts, index, 1)
    return {"seconds": time.perf_counter() - start, "total": int(counts.sum())}
"""

# The leanest count numpy offers for the same known codes: an int32 cell index
# added into a uint32 array (what the streaming tally does per batch), i.e. the
# floor of read + count without any label handling.
LEAN = """
import time
import numpy as np
import pyarrow.dataset as ds
from foldcorr.sources.reading import BATCH_ROWS
def measure(paths, classes, folds):
    counts = np.zeros((folds + 1) * classes * classes, dtype=np.uint32)
    one = np.uint32(1)
    start = time.perf_counter()
    for batch in ds.dataset(paths, format="parquet").to_batches(
            columns=["actual", "predicted", "fold"], batch_size=BATCH_ROWS,
            batch_readahead=1, fragment_readahead=1):
        f, a, p = (batch.column(c).to_numpy() for c in ("fold", "actual", "predicted"))
        index = np.multiply(f, classes, dtype=np.int32)
        index += a
        index *= classes
        index += p
        np.add.at(counts, index, one)
    return {"seconds": time.perf_counter() - start, "total": int(counts.sum(dtype=np.int64))}
"""


def run(quick: bool = False) -> dict:
    if quick:
        rows, classes, files, chunk = 400_000, 50, 10, 20_000
    else:
        rows, classes, files, chunk = 10**8, 1000, 10, 10**6
    folds = 5
    folder = tempfile.mkdtemp(prefix="foldcorr-bench-stream-")
    try:
        start = time.perf_counter()
        paths = [str(p) for p in write_parquet_dataset(folder, rows=rows, classes=classes,
                                                       folds=folds, files=files, chunk=chunk)]
        generated = time.perf_counter() - start
        in_child(READ, paths=paths)               # warm the page cache for both
        small = in_child(TALLY, path=paths[0])
        big = in_child(TALLY, path=f"{folder}/part-*.parquet")
        read = in_child(READ, paths=paths)
        bare = in_child(BARE, paths=paths, classes=classes, folds=folds)
        lean = in_child(LEAN, paths=paths, classes=classes, folds=folds)
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    assert big["total"] == rows == bare["total"] == lean["total"] and small["total"] == rows // files
    rate = big["rows"] / big["seconds"]
    ratio = big["seconds"] / read["seconds"]
    rss = big["peak_rss_mb"] / small["peak_rss_mb"]
    print(f"generate {rows:.0e} rows in {files} Parquet files: {generated:.1f} s")
    print(f"stream tally of {rows:.0e} rows (K={classes}, {folds} folds): ours "
          f"{big['seconds']:.2f} s, {rate / 1e6:.1f} M rows/s")
    print(f"peak RSS: {small['rows']:.0e} rows {small['peak_rss_mb']:.0f} MB, {rows:.0e} rows "
          f"{big['peak_rss_mb']:.0f} MB, ratio {rss:.2f}x (constant memory: ~1x)")
    print(f"tally vs plain pyarrow read of the same columns: ours {big['seconds']:.2f} s, "
          f"reference {read['seconds']:.2f} s, ratio {ratio:.2f}x (target <= 1.5x)")
    print(f"tally vs the same read plus a bare numpy count (known codes, no labels): ours "
          f"{big['seconds']:.2f} s, reference {bare['seconds']:.2f} s, "
          f"ratio {big['seconds'] / bare['seconds']:.2f}x")
    print(f"tally vs the same read plus the leanest numpy count (int32 index, uint32 counts): "
          f"ours {big['seconds']:.2f} s, reference {lean['seconds']:.2f} s, "
          f"ratio {big['seconds'] / lean['seconds']:.2f}x; that floor is "
          f"{lean['seconds'] / read['seconds']:.2f}x the read")
    return {
        "lean_numpy_seconds": lean["seconds"],
        "tally_over_lean_numpy": big["seconds"] / lean["seconds"],
        "lean_numpy_over_read": lean["seconds"] / read["seconds"],
        "bare_numpy_seconds": bare["seconds"],
        "tally_over_bare_numpy": big["seconds"] / bare["seconds"],
        "rows": rows, "classes": classes, "folds": folds, "files": files,
        "generate_seconds": generated,
        "tally_seconds": big["seconds"], "rows_per_second": rate,
        "small_rows": small["rows"], "small_tally_seconds": small["seconds"],
        "peak_rss_mb_small": small["peak_rss_mb"], "peak_rss_mb_large": big["peak_rss_mb"],
        "peak_rss_ratio": rss,
        "read_seconds": read["seconds"], "read_peak_rss_mb": read["peak_rss_mb"],
        "tally_over_read": ratio,
    }


if __name__ == "__main__":
    run()

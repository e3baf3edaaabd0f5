"""The Dask engine on a LocalCluster (127.0.0.1) with 1 and with 2 worker processes.

The same generated Parquet dataset (full size: 2 x 10^7 rows, K = 1000,
5 folds, 20 files) is tallied by the local streaming engine and by the Dask
engine with one and with two single-threaded workers; cluster start-up is
timed apart. On a 2-core machine the second worker competes with the client
and the scheduler, so expect well under 2x.
"""

from __future__ import annotations

import shutil
import tempfile
import time

from _datasets import write_parquet_dataset


def _timed(fn):
    start = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - start


def run(quick: bool = False) -> dict:
    try:
        import distributed
    except ImportError:
        print("dask: skipped (install the 'dask' extra)")
        return {"skipped": "the dask extra is not installed"}
    import numpy as np

    from foldcorr.sources import tally_dataset

    if quick:
        rows, classes, files, chunk = 200_000, 50, 8, 25_000
    else:
        rows, classes, files, chunk = 2 * 10**7, 1000, 20, 10**6
    folder = tempfile.mkdtemp(prefix="foldcorr-bench-dask-")
    figures = {"rows": rows, "classes": classes, "folds": 5, "files": files}
    try:
        write_parquet_dataset(folder, rows=rows, classes=classes, folds=5, files=files, chunk=chunk)
        tally_dataset(folder, progress=False)                      # warm the page cache
        local, figures["local_seconds"] = _timed(lambda: tally_dataset(folder, progress=False))
        for workers in (1, 2):
            (cluster, client), start = _timed(lambda: _cluster(distributed, workers))
            try:
                tally_dataset(folder, engine="dask", scheduler=client, progress=False)  # warm-up
                result, seconds = _timed(lambda: tally_dataset(folder, engine="dask",
                                                               scheduler=client, progress=False))
            finally:
                client.close()
                cluster.close()
            assert np.array_equal(result.tensor.values, local.tensor.values)
            figures[f"workers_{workers}_seconds"] = seconds
            figures[f"workers_{workers}_startup_seconds"] = start
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    one, two = figures["workers_1_seconds"], figures["workers_2_seconds"]
    figures["speedup_2_over_1"] = one / two
    figures["rows_per_second_2_workers"] = rows / two
    print(f"dask tally of {rows:.0e} rows in {files} files, 2 workers vs 1: ours {two:.2f} s, "
          f"reference {one:.2f} s, ratio {one / two:.2f}x "
          f"(cluster start {figures['workers_2_startup_seconds']:.1f} s / "
          f"{figures['workers_1_startup_seconds']:.1f} s, not included)")
    print(f"dask (2 workers) vs local streaming engine: ours {two:.2f} s, reference "
          f"{figures['local_seconds']:.2f} s, ratio {figures['local_seconds'] / two:.2f}x")
    return figures


def _cluster(distributed, workers: int):
    cluster = distributed.LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                                       host="127.0.0.1", dashboard_address="127.0.0.1:0",
                                       scheduler_kwargs={"dashboard": False})
    return cluster, distributed.Client(cluster)


if __name__ == "__main__":
    run()

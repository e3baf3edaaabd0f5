"""The Dask engine gives the local tensor; a lost worker fails the run cleanly.

Outside reference: ``sklearn.metrics.confusion_matrix`` on the concatenated
data (Pedregosa et al. 2011). A LocalCluster with two worker processes on
127.0.0.1 runs for this module only.
"""

from __future__ import annotations

import json
import os

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import confusion_matrix

distributed = pytest.importorskip("distributed")
dd = pytest.importorskip("dask.dataframe")

import dask  # noqa: E402

from foldcorr.cli import main  # noqa: E402
from foldcorr.errors import EngineError, InvalidInputError  # noqa: E402
from foldcorr.sources import tally_dataset  # noqa: E402


@pytest.fixture(scope="module")
def client():
    # One retry only, so that the lost-worker test stays short.
    with dask.config.set({"distributed.scheduler.allowed-failures": 1}):
        cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                           host="127.0.0.1", dashboard_address="127.0.0.1:0",
                                           scheduler_kwargs={"dashboard": False})
        c = distributed.Client(cluster)
        try:
            yield c
        finally:
            c.close()
            cluster.close()


def _dataset(tmp_path, suffix=".parquet", n_files=5, seed=21):
    rng = np.random.default_rng(seed)
    parts = []
    for i in range(n_files):
        k = 4 + 2 * i          # labels that appear only in later files
        df = pd.DataFrame({"actual": rng.integers(0, k, 300), "predicted": rng.integers(0, k + 1, 300),
                           "fold": rng.choice(["a", "b", "c"], 300)})
        parts.append(df)
        if suffix == ".parquet":
            df.to_parquet(tmp_path / f"part-{i}.parquet")
        else:
            df.to_csv(tmp_path / f"part-{i}.csv", index=False)
    return pd.concat(parts, ignore_index=True)


def _reference(whole):
    labels = sorted(set(whole["actual"]) | set(whole["predicted"]))
    # sklearn.metrics.confusion_matrix per fold on the concatenated rows
    return labels, np.stack([
        confusion_matrix(whole.loc[whole["fold"] == f, "actual"],
                         whole.loc[whole["fold"] == f, "predicted"], labels=labels)
        for f in ("a", "b", "c")])


@pytest.mark.parametrize("suffix", [".parquet", ".csv"])
def test_dask_files_equal_local_and_sklearn(client, tmp_path, suffix):
    whole = _dataset(tmp_path, suffix)
    if suffix == ".csv":  # issue 12: CSV labels are the text written, "10" sorts before "2"
        whole = whole.astype({"actual": str, "predicted": str})
    labels, ref = _reference(whole)
    local = tally_dataset(tmp_path).tensor
    remote = tally_dataset(tmp_path, engine="dask", scheduler=client).tensor
    assert remote.coords["actual"].values.tolist() == labels
    np.testing.assert_array_equal(remote.values, ref)
    np.testing.assert_array_equal(remote.values, local.values)
    assert remote.attrs == local.attrs


def test_dask_keeps_label_text_as_typed(client, tmp_path):
    # the label rule (docs/conventions.md): 01/1, 007/7, 1e3/1000, 1/1.0 and " a"/"a" stay apart
    truth = ["01", "007", "1e3", "1", " a", "NA"]
    pred = ["1", "7", "1000", "1.0", "a", "NA"]
    pd.DataFrame({"actual": truth, "predicted": pred}).to_csv(tmp_path / "p.csv", index=False)
    t = tally_dataset(tmp_path / "p.csv", engine="dask", scheduler=client).tensor
    labels = sorted(set(truth) | set(pred))
    assert t.coords["actual"].values.tolist() == labels
    # sklearn.metrics.confusion_matrix of the same rows as typed
    np.testing.assert_array_equal(t.values, confusion_matrix(truth, pred, labels=labels))


def test_dask_dataframe_equals_sklearn(client, tmp_path):
    whole = _dataset(tmp_path)
    labels, ref = _reference(whole)
    frame = dd.read_parquet(str(tmp_path / "*.parquet"))
    t = tally_dataset(frame, engine="dask", scheduler=client, where='fold != "z"').tensor
    assert t.coords["actual"].values.tolist() == labels
    assert t.coords["fold"].values.tolist() == ["a", "b", "c"]
    np.testing.assert_array_equal(t.values, ref)


def test_dask_cli_with_scheduler_address_equals_local(client, tmp_path, capsys):
    _dataset(tmp_path)
    assert main(["score", str(tmp_path), "--format", "json", "--quiet"]) == 0
    local = json.loads(capsys.readouterr().out)
    assert main(["score", str(tmp_path), "--format", "json", "--engine", "dask",
                 "--scheduler", client.scheduler.address]) == 0
    assert json.loads(capsys.readouterr().out) == local


def test_dask_bad_file_stops_or_is_skipped(client, tmp_path):
    whole = _dataset(tmp_path, n_files=3)
    (tmp_path / "part-1.parquet").write_bytes(b"PAR1" + b"\x00" * 64)
    with pytest.raises(InvalidInputError, match=r"^part-1\.parquet: cannot read as parquet"):
        tally_dataset(tmp_path, engine="dask", scheduler=client)
    r = tally_dataset(tmp_path, engine="dask", scheduler=client, skip_bad_files=True)
    assert [name for name, _ in r.skipped] == ["part-1.parquet"]
    assert r.rows == 600 and len(whole) == 900


def _kill_worker(piece):
    # Runs on a worker process: a lost worker in the middle of the run.
    i, parent = piece
    if i == 1 and os.getpid() != parent:
        os._exit(1)
    return pd.DataFrame({"actual": ["x", "y"], "predicted": ["x", "x"]})


def test_lost_worker_fails_cleanly_without_a_tensor(client):
    frame = dd.from_map(_kill_worker, [(i, os.getpid()) for i in range(3)],
                        meta=pd.DataFrame({"actual": pd.Series(dtype=object),
                                           "predicted": pd.Series(dtype=object)}))
    with pytest.raises(EngineError, match="the Dask run failed and produced no tensor: "
                                          "KilledWorker"):
        tally_dataset(frame, engine="dask", scheduler=client)
    client.wait_for_workers(2, timeout=60)
    # The cluster still works afterwards.
    frame = dd.from_pandas(pd.DataFrame({"actual": ["x", "y", "y"], "predicted": ["x", "x", "y"]}),
                           npartitions=2)
    t = tally_dataset(frame, engine="dask", scheduler=client).tensor
    assert t.values.tolist() == [[1, 0], [1, 1]]


def test_unreachable_scheduler(monkeypatch):
    import foldcorr.sources.cluster

    monkeypatch.setattr(foldcorr.sources.cluster, "CONNECT_TIMEOUT", 1.0)
    with pytest.raises(EngineError, match="cannot reach the Dask scheduler"):
        tally_dataset(".", engine="dask", scheduler="tcp://127.0.0.1:9")


def test_the_running_client_is_used_and_no_second_cluster_starts(client, tmp_path, monkeypatch):
    whole = _dataset(tmp_path, n_files=3)
    labels, ref = _reference(whole)

    def no_second_cluster(*args, **kwargs):
        raise AssertionError("a second cluster was started")

    monkeypatch.setattr(distributed, "LocalCluster", no_second_cluster)
    with client.as_current():
        t = tally_dataset(tmp_path, engine="dask").tensor
    # sklearn.metrics.confusion_matrix per fold on the concatenated rows
    np.testing.assert_array_equal(t.values, ref)
    assert client.status == "running"          # the caller's client is left open


def test_dask_counts_equal_the_expanded_rows(client, tmp_path):
    whole = _dataset(tmp_path, n_files=2)
    labels, ref = _reference(whole)
    counts = whole.groupby(["actual", "predicted", "fold"]).size().rename("n").reset_index()
    counts.to_parquet(tmp_path / "counts.parquet")
    for source in (dd.from_pandas(counts, npartitions=3), tmp_path / "counts.parquet"):
        t = tally_dataset(source, engine="dask", scheduler=client, count="n").tensor
        assert t.dtype == np.int64
        np.testing.assert_array_equal(t.values, ref)


def test_dask_reads_hive_partitions_like_the_local_engine(client, tmp_path):
    import pyarrow as pa
    import pyarrow.dataset as ds

    (tmp_path / "flat").mkdir()
    whole = _dataset(tmp_path / "flat", n_files=1)
    ds.write_dataset(pa.Table.from_pandas(whole, preserve_index=False), tmp_path / "runs",
                     format="parquet", partitioning=["fold"], partitioning_flavor="hive")
    labels, ref = _reference(whole)
    t = tally_dataset(tmp_path / "runs", engine="dask", scheduler=client).tensor
    # sklearn.metrics.confusion_matrix per fold on the concatenated rows
    np.testing.assert_array_equal(t.values, ref)
    one = tally_dataset(tmp_path / "runs", engine="dask", scheduler=client,
                        where='fold == "b"').tensor
    assert one.coords["fold"].values.tolist() == ["b"]
    np.testing.assert_array_equal(one.sel(fold="b").values, ref[1])

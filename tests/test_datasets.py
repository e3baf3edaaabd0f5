"""Data where users keep it: hive partitions, URLs (S3, memory, file), tables in memory,
aggregated counts, standard input and output, and the filter language's limits.

Every tensor is checked against scikit-learn's ``confusion_matrix`` of the concatenated rows,
fold by fold (the reference library), or against the same data read another way.
"""

from __future__ import annotations

import io
import json
import os

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.dataset as ds
import pytest
from sklearn.metrics import confusion_matrix

from foldcorr.cli import main
from foldcorr.errors import InvalidInputError, OptionError
from foldcorr.sources import load, tally_dataset
from foldcorr.sources.where import MAX_DEPTH, MAX_TERMS, parse_where


def _rows(n=400, seed=3):
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"actual": rng.choice(list("abcd"), n),
                         "predicted": rng.choice(list("abcde"), n),
                         "fold": rng.integers(0, 3, n),
                         "split": rng.choice(["test", "train"], n)})


def _sklearn(df, folds=None):
    """sklearn.metrics.confusion_matrix of the rows, per fold (the outside reference)."""
    labels = sorted(set(df["actual"]) | set(df["predicted"]))
    folds = sorted(set(df["fold"])) if folds is None else folds
    return labels, np.stack([confusion_matrix(df.loc[df["fold"] == f, "actual"],
                                              df.loc[df["fold"] == f, "predicted"],
                                              labels=labels) for f in folds])


def _write_hive(df, root, fmt="parquet"):
    table = pa.Table.from_pandas(df, preserve_index=False)
    if fmt == "parquet":
        ds.write_dataset(table, root, format="parquet", partitioning=["fold"],
                         partitioning_flavor="hive")
        return
    for f, part in df.groupby("fold"):
        (root / f"fold={f}").mkdir(parents=True, exist_ok=True)
        part.drop(columns="fold").to_csv(root / f"fold={f}" / "part-0.csv", index=False)


# --------------------------------------------------------------------------- hive partitions

@pytest.mark.parametrize("fmt", ["parquet", "csv"])
def test_hive_folds_equal_a_fold_column_and_sklearn(tmp_path, fmt):
    df = _rows()
    _write_hive(df, tmp_path / "runs", fmt)
    df.to_parquet(tmp_path / "flat.parquet")
    labels, ref = _sklearn(df)
    t = load(tmp_path / "runs")
    assert t.dims == ("fold", "actual", "predicted")
    assert t.coords["fold"].values.tolist() == [0, 1, 2]
    assert t.coords["actual"].values.tolist() == labels
    np.testing.assert_array_equal(t.values, ref)          # sklearn.metrics.confusion_matrix
    np.testing.assert_array_equal(t.values, load(tmp_path / "flat.parquet").values)
    # the partition column named as the fold, as the command line says it
    np.testing.assert_array_equal(load(tmp_path / "runs", fold="fold").values, ref)


def test_hive_filter_prunes_files_and_mixes_with_file_columns(tmp_path):
    df = _rows()
    _write_hive(df, tmp_path / "runs")
    t = load(tmp_path / "runs", where="fold == 1")
    assert t.coords["fold"].values.tolist() == [1] and t.attrs["n_files"] == 1
    keep = df[(df["fold"] != 1) & (df["split"] == "test")]
    labels, ref = _sklearn(keep)
    t = load(tmp_path / "runs", where='fold != 1 and split == "test"', classes=labels)
    np.testing.assert_array_equal(t.values, ref)
    expr = (pc.field("fold") != 1) & (pc.field("split") == "test")
    np.testing.assert_array_equal(load(tmp_path / "runs", where=expr, classes=labels).values, ref)
    t = load(tmp_path / "runs", where='fold == 1 and split == "test"')
    assert t.coords["fold"].values.tolist() == [1] and t.attrs["n_files"] == 1
    with pytest.raises(InvalidInputError, match="^runs: no rows pass the filter"):
        load(tmp_path / "runs", where="fold == 7")


def test_any_partition_column_can_be_the_fold(tmp_path):
    df = _rows()
    table = pa.Table.from_pandas(df, preserve_index=False)
    ds.write_dataset(table, tmp_path / "runs", format="parquet", partitioning=["split"],
                     partitioning_flavor="hive")
    t = load(tmp_path / "runs", fold="split")
    assert t.coords["fold"].values.tolist() == ["test", "train"]
    labels = sorted(set(df["actual"]) | set(df["predicted"]))
    for split in ("test", "train"):
        part = df[df["split"] == split]
        np.testing.assert_array_equal(t.sel(fold=split).values, confusion_matrix(
            part["actual"], part["predicted"], labels=labels))


def test_cli_scores_hive_folds(tmp_path, capsys):
    df = _rows()
    _write_hive(df, tmp_path / "runs")
    df.to_parquet(tmp_path / "flat.parquet")
    assert main(["score", str(tmp_path / "runs"), "--format", "json", "--fold", "fold"]) == 0
    hive = json.loads(capsys.readouterr().out)
    assert main(["score", str(tmp_path / "flat.parquet"), "--format", "json"]) == 0
    flat = json.loads(capsys.readouterr().out)
    assert hive["pooled"] == flat["pooled"] and hive["folds"] == flat["folds"]


# --------------------------------------------------------------------------------------- URLs

def test_memory_url_with_partitions():
    fsspec = pytest.importorskip("fsspec")
    df = _rows(seed=5)
    for f, part in df.groupby("fold"):
        with fsspec.open(f"memory://tests-datasets/runs/fold={f}/part.csv", "w") as fh:
            part.drop(columns="fold").to_csv(fh, index=False)
    labels, ref = _sklearn(df)
    t = load("memory://tests-datasets/runs")
    np.testing.assert_array_equal(t.values, ref)          # sklearn.metrics.confusion_matrix
    assert t.attrs["source"] == "runs"
    with pytest.raises(InvalidInputError, match="file not found"):
        load("memory://tests-datasets/nothing-here")


def test_file_url_equals_the_path(tmp_path):
    df = _rows()
    _write_hive(df, tmp_path / "runs")
    np.testing.assert_array_equal(load(f"file://{tmp_path / 'runs'}").values,
                                  load(tmp_path / "runs").values)


@pytest.fixture(scope="module")
def s3_server():
    """An S3-compatible server (moto's server mode) on 127.0.0.1, with test credentials."""
    server_mod = pytest.importorskip("moto.server")
    pytest.importorskip("s3fs")
    import socket

    with socket.socket() as probe:           # a free port on 127.0.0.1
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    server = server_mod.ThreadedMotoServer(ip_address="127.0.0.1", port=port, verbose=False)
    server.start()
    env = {"AWS_ACCESS_KEY_ID": "testing", "AWS_SECRET_ACCESS_KEY": "testing",
           "AWS_DEFAULT_REGION": "us-east-1", "AWS_ENDPOINT_URL": f"http://127.0.0.1:{port}"}
    old = {k: os.environ.get(k) for k in env}
    os.environ.update(env)
    try:
        yield env
    finally:
        server.stop()
        for k, v in old.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def test_s3_bucket_of_hive_parquet_scored_by_url(s3_server, tmp_path, capsys):
    import s3fs

    df = _rows(seed=11)
    fs = s3fs.S3FileSystem(skip_instance_cache=True)
    fs.mkdir("foldcorr-runs")
    table = pa.Table.from_pandas(df, preserve_index=False)
    import pyarrow.fs as pafs

    ds.write_dataset(table, "foldcorr-runs/eval", format="parquet", partitioning=["fold"],
                     partitioning_flavor="hive",
                     filesystem=pafs.PyFileSystem(pafs.FSSpecHandler(fs)))
    labels, ref = _sklearn(df)
    t = load("s3://foldcorr-runs/eval")
    np.testing.assert_array_equal(t.values, ref)          # sklearn.metrics.confusion_matrix
    keep = df[df["split"] == "test"]
    t = load("s3://foldcorr-runs/eval", where='split == "test"', classes=labels)
    np.testing.assert_array_equal(t.values, np.stack([confusion_matrix(
        keep.loc[keep["fold"] == f, "actual"], keep.loc[keep["fold"] == f, "predicted"],
        labels=labels) for f in (0, 1, 2)]))
    assert main(["score", "s3://foldcorr-runs/eval", "--format", "json"]) == 0
    assert json.loads(capsys.readouterr().out)["schema"].startswith("foldcorr.score")
    with pytest.raises(InvalidInputError, match="file not found"):
        load("s3://foldcorr-runs/missing")


# ---------------------------------------------------------------------------- tables in memory

def _kinds(df):
    table = pa.Table.from_pandas(df, preserve_index=False)
    yield "pandas", df
    yield "arrow table", table
    yield "record batch reader", pa.RecordBatchReader.from_batches(
        table.schema, table.to_batches(max_chunksize=50))
    yield "arrow dataset", ds.dataset(table)
    try:
        import polars as pl
    except ImportError:
        pass
    else:
        yield "polars", pl.from_pandas(df)
    try:
        import dask.dataframe as dd
    except ImportError:
        pass
    else:
        yield "dask", dd.from_pandas(df, npartitions=3)


def test_every_kind_in_memory_equals_sklearn():
    df = _rows(seed=8)
    labels, ref = _sklearn(df)
    for name, obj in _kinds(df):
        t = tally_dataset(obj).tensor
        assert t.coords["actual"].values.tolist() == labels, name
        np.testing.assert_array_equal(t.values, ref, err_msg=name)   # sklearn confusion_matrix


def test_polars_frames_equal_sklearn():
    # the 'polars' extra; skipped where polars is not installed
    pl = pytest.importorskip("polars")
    df = _rows(seed=10)
    labels, ref = _sklearn(df)
    frame = pl.from_pandas(df)
    for obj in (frame, frame.lazy()):
        t = tally_dataset(obj).tensor
        assert t.coords["actual"].values.tolist() == labels
        np.testing.assert_array_equal(t.values, ref)   # sklearn confusion_matrix
    keep = df[df["split"] == "test"]
    t = load(frame, where='split == "test"', classes=labels, fold=None)
    np.testing.assert_array_equal(t.values, confusion_matrix(keep["actual"], keep["predicted"],
                                                             labels=labels))


def test_arrow_expression_and_text_filters_agree():
    df = _rows(seed=9)
    keep = df[(df["split"] == "test") & (df["fold"] > 0)]
    labels, ref = _sklearn(keep)
    expr = (pc.field("split") == "test") & (pc.field("fold") > 0)
    for name, obj in _kinds(df):
        t = tally_dataset(obj, where=expr, classes=labels).tensor
        np.testing.assert_array_equal(t.values, ref, err_msg=name)
    t = load(df, where='split == "test" and fold > 0', classes=labels)
    np.testing.assert_array_equal(t.values, ref)


def test_an_unknown_object_is_refused():
    with pytest.raises(OptionError, match="cannot read a 'dict' as a table"):
        load({"actual": ["a"]})


# ---------------------------------------------------------------------------- aggregated counts

def test_counts_equal_the_expanded_rows(tmp_path):
    from foldcorr.analysis.uncertainty import bootstrap
    from foldcorr.metrics import rk

    df = _rows(seed=12)
    counts = df.groupby(["actual", "predicted", "fold"]).size().rename("n").reset_index()
    counts.to_csv(tmp_path / "counts.csv", index=False)
    expanded = load(df)
    for source in (counts, tmp_path / "counts.csv"):
        t = load(source, count="n")
        assert t.dtype == np.int64 and t.attrs["count_column"] == "n"
        np.testing.assert_array_equal(t.values, expanded.values)
        np.testing.assert_array_equal(t.values, _sklearn(df)[1])   # sklearn confusion_matrix
        np.testing.assert_array_equal(rk(t.sum("fold")), rk(expanded.sum("fold")))
        a = bootstrap(t, n_resamples=200, seed=4)
        b = bootstrap(expanded, n_resamples=200, seed=4)
        assert (float(a.low), float(a.high)) == (float(b.low), float(b.high))


def test_bad_counts_are_refused_naming_the_row(tmp_path):
    base = "actual,predicted,n\na,a,3\nb,a,{}\n"
    for bad, said in (("-1", "-1"), ("2.5", "2.5"), ("lots", "'lots'")):
        p = tmp_path / "c.csv"
        p.write_text(base.format(bad))
        with pytest.raises(InvalidInputError, match=rf"^c\.csv: column 'n' row 2: count {said}"):
            load(p, count="n")
    with pytest.raises(OptionError, match="`weight` and `count` cannot both be given"):
        load(pd.DataFrame({"actual": ["a"], "predicted": ["a"], "n": [1]}), count="n",
             weight="n")


def test_cli_count_flag(tmp_path, capsys):
    df = _rows(seed=13)
    df.to_csv(tmp_path / "rows.csv", index=False)
    df.groupby(["actual", "predicted", "fold"]).size().rename("n").reset_index().to_csv(
        tmp_path / "counts.csv", index=False)
    assert main(["score", str(tmp_path / "rows.csv"), "--format", "json", "--ci", "0.9",
                 "--seed", "1"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert main(["score", str(tmp_path / "counts.csv"), "--count", "n", "--format", "json",
                 "--ci", "0.9", "--seed", "1"]) == 0
    counts = json.loads(capsys.readouterr().out)
    assert {k: v for k, v in counts.items() if k != "source"} == \
        {k: v for k, v in rows.items() if k != "source"}


# ------------------------------------------------------------------------------- stdin, stdout

def test_dash_reads_stdin_and_writes_stdout(tmp_path, capsys, monkeypatch):
    df = _rows(seed=14)
    df.to_csv(tmp_path / "p.csv", index=False)
    assert main(["score", str(tmp_path / "p.csv"), "--format", "json"]) == 0
    want = json.loads(capsys.readouterr().out)
    for data, extra in ((df.to_csv(index=False).encode(), []),
                        (df.to_json(orient="records", lines=True).encode(), []),
                        (df.to_parquet(), ["--input-format", "parquet"])):
        monkeypatch.setattr("sys.stdin", io.TextIOWrapper(io.BytesIO(data)))
        assert main(["score", "-", "--format", "json", "--output", "-", *extra]) == 0
        got = json.loads(capsys.readouterr().out)
        assert got["pooled"] == want["pooled"]
    assert not (tmp_path / "-").exists() and not os.path.exists("-")


def _stdin(monkeypatch, data: bytes):
    monkeypatch.setattr("sys.stdin", io.TextIOWrapper(io.BytesIO(data)))


@pytest.mark.parametrize("verb", [
    ["gate", "{}", "--min-rk", "0.1", "--format", "json"],
    ["compare", "{}", "--pred-a", "predicted", "--pred-b", "other", "--seed", "1",
     "--resamples", "200", "--format", "json"],
    ["sweep", "{}", "--truth", "actual", "--score", "score", "--format", "json"],
])
def test_dash_reads_stdin_for_gate_compare_and_sweep(tmp_path, capsys, monkeypatch, verb):
    # the same report from a file and from standard input (CSV and Parquet)
    df = _rows(seed=15)
    df["other"] = df["predicted"].iloc[::-1].to_numpy()
    if verb[0] == "sweep":
        df = pd.DataFrame({"actual": (df["actual"] == df["actual"].iloc[0]).astype(int),
                           # multiples of 1/64: exact in binary and in short decimal text,
                           # so every CSV parser reads the same float the Parquet file holds
                           "score": (np.arange(len(df)) % 64) / 64})
    df.to_csv(tmp_path / "p.csv", index=False)
    assert main([v.format(tmp_path / "p.csv") for v in verb]) in (0, 1)
    want = json.loads(capsys.readouterr().out)
    for data, extra in ((df.to_csv(index=False).encode(), []),
                        (df.to_parquet(), ["--input-format", "parquet"])):
        _stdin(monkeypatch, data)
        assert main([v.format("-") for v in verb] + extra) in (0, 1)
        got = json.loads(capsys.readouterr().out)
        assert {k: v for k, v in got.items() if k != "source"} == \
            {k: v for k, v in want.items() if k != "source"}


def test_stdin_is_read_for_one_table_only(capsys, monkeypatch):
    _stdin(monkeypatch, b"id,actual,predicted\n1,a,a\n")
    assert main(["compare", "-", "-", "--id", "id"]) == 2
    assert "standard input (-) can be read once" in capsys.readouterr().err


def test_gate_refuses_count_with_a_saved_evaluation(tmp_path, capsys):
    path = tmp_path / "p.csv"
    path.write_text("actual,predicted,n\na,a,3\nb,a,1\nb,b,2\n")
    assert main(["score", str(path), "--count", "n", "--save", str(tmp_path / "r.nc")]) == 0
    capsys.readouterr()
    assert main(["gate", str(tmp_path / "r.nc"), "--count", "n", "--min-rk", "0.1"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "`count` (--count) cannot apply" in err[0]
    # honoured with a table: the gate sees the 6 samples the counts stand for
    assert main(["gate", str(path), "--count", "n", "--min-rk", "0.1", "--format", "json"]) == 0
    assert "pooled over 6 samples" in capsys.readouterr().out


# ------------------------------------------------------------------------- the filter's limits

def test_deep_or_huge_filters_give_one_clear_error(tmp_path, capsys):
    deep = "(" * (MAX_DEPTH + 1) + "a == 1" + ")" * (MAX_DEPTH + 1)
    with pytest.raises(InvalidInputError, match="nests deeper than"):
        parse_where(deep)
    with pytest.raises(InvalidInputError, match="nests deeper than"):
        parse_where("not " * 10_000 + "a == 1")
    with pytest.raises(InvalidInputError, match="more than 1000 comparisons"):
        parse_where(" or ".join(["a == 1"] * (MAX_TERMS + 1)))
    with pytest.raises(InvalidInputError, match="characters long"):
        parse_where("a == 1 or " * 20_000 + "a == 1")
    # as deep and as long as allowed still parses, and builds a shallow Arrow expression
    ok = "(" * MAX_DEPTH + " or ".join(["a == 1"] * MAX_TERMS) + ")" * MAX_DEPTH
    w = parse_where(ok)
    assert len(w.tree) == MAX_TERMS + 1
    w.expression(pa.schema([("a", pa.int64())]))
    _rows().to_csv(tmp_path / "p.csv", index=False)
    assert main(["score", str(tmp_path / "p.csv"), "--where", "(" * 10_000]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "nests deeper" in err[0]

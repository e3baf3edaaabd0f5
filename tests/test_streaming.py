"""Streaming sources: datasets read batch by batch equal the whole-table tally.

Outside references: ``sklearn.metrics.confusion_matrix`` on the concatenated
data (Pedregosa et al. 2011), and pandas/pyarrow as the readers of record.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import confusion_matrix

from foldcorr.cli import main
from foldcorr.errors import InvalidInputError
from foldcorr.sources import load_tensor
from foldcorr.sources.reading import resolve_paths
from foldcorr.sources.stream import stream_tensor
from foldcorr.sources.tables import TableSpec, _load_in_memory
from foldcorr.sources.where import parse_where
from foldcorr.tensor.accumulator import StreamTally
from foldcorr.tensor import tally_frame


def _write(df: pd.DataFrame, path) -> None:
    suffix = path.suffix
    if suffix == ".csv":
        df.to_csv(path, index=False)
    elif suffix == ".parquet":
        df.to_parquet(path, index=False)
    else:
        df.to_json(path, orient="records", lines=True)


def _sklearn_tensor(df, labels, folds=None, weight=None):
    """Per-fold confusion matrices from the reference library."""
    if folds is None:
        return confusion_matrix(df["actual"], df["predicted"], labels=labels,
                                sample_weight=None if weight is None else df[weight])
    return np.stack([
        confusion_matrix(df.loc[df["fold"] == f, "actual"], df.loc[df["fold"] == f, "predicted"],
                         labels=labels,
                         sample_weight=None if weight is None else df.loc[df["fold"] == f, weight])
        for f in folds])


def _parts(seed=3, n_files=4, rows=400):
    """Files whose label sets grow: some labels appear only in later files."""
    rng = np.random.default_rng(seed)
    parts = []
    for i in range(n_files):
        k = 3 + 3 * i
        names = np.array([f"taxon{j:02d}" for j in range(k)])
        parts.append(pd.DataFrame({
            "actual": names[rng.integers(0, k, rows)],
            "predicted": names[rng.integers(0, k, rows)],
            "fold": rng.integers(1, 4, rows),
            "w": rng.random(rows),
        }))
    return parts


@pytest.mark.parametrize("suffix", [".csv", ".parquet", ".jsonl"])
def test_dataset_equals_sklearn_on_concatenation(tmp_path, suffix):
    parts = _parts()
    for i, df in enumerate(parts):
        _write(df, tmp_path / f"part-{i}{suffix}")
    whole = pd.concat(parts, ignore_index=True)
    labels = sorted(set(whole["actual"]) | set(whole["predicted"]))
    # batch_rows=37 forces many batches per file and labels first seen mid-file.
    r = stream_tensor(tmp_path, batch_rows=37)
    t = r.tensor
    assert t.coords["actual"].values.tolist() == labels
    assert t.coords["fold"].values.tolist() == [1, 2, 3]
    # sklearn.metrics.confusion_matrix, per fold, on the concatenated rows
    np.testing.assert_array_equal(t.values, _sklearn_tensor(whole, labels, [1, 2, 3]))
    assert r.rows == len(whole) == t.attrs["n_rows"]
    assert t.attrs["n_files"] == 4 and r.files == tuple(f"part-{i}{suffix}" for i in range(4))


def test_weighted_dataset_equals_sklearn(tmp_path):
    parts = _parts(seed=5)
    for i, df in enumerate(parts):
        _write(df, tmp_path / f"p{i}.parquet")
    whole = pd.concat(parts, ignore_index=True)
    labels = sorted(set(whole["actual"]) | set(whole["predicted"]))
    t = stream_tensor(tmp_path, weight="w", batch_rows=50).tensor
    assert t.dtype == np.float64
    # sklearn.metrics.confusion_matrix with sample_weight; sums in another order
    np.testing.assert_allclose(t.values, _sklearn_tensor(whole, labels, [1, 2, 3], "w"),
                               rtol=1e-12)


KINDS = {
    "text": (lambda r, n: r.choice(["owl", "wren", "kite", "tern"], n),
             lambda r, n: r.choice(["owl", "wren", "kite", "tern", "rail"], n)),
    "small int": (lambda r, n: r.integers(0, 12, n), lambda r, n: r.integers(0, 15, n)),
    "large int": (lambda r, n: r.integers(0, 9, n) * 10_000 - 20_000,
                  lambda r, n: r.integers(0, 9, n) * 10_000 - 20_000),
    "float": (lambda r, n: r.integers(0, 6, n) / 4, lambda r, n: r.integers(0, 6, n) / 4),
    "bool": (lambda r, n: r.random(n) < 0.4, lambda r, n: r.random(n) < 0.6),
    "number beside text": (lambda r, n: r.integers(1, 4, n),
                           lambda r, n: r.choice(["1", "2", "3", "other"], n)),
}


@pytest.mark.parametrize("kind", list(KINDS))
@pytest.mark.parametrize("suffix", [".csv", ".parquet", ".jsonl"])
@pytest.mark.parametrize("fold", ["fold", None])
def test_streamed_equals_whole_table_tally(tmp_path, kind, suffix, fold):
    """Same counts, class order and type, fold order and attrs as the whole table in memory."""
    rng = np.random.default_rng(11)
    n = 900
    make_t, make_p = KINDS[kind]
    df = pd.DataFrame({"actual": make_t(rng, n), "predicted": make_p(rng, n)})
    if fold:
        df["fold"] = rng.choice(["r1", "r2", "r10"], n)
    path = tmp_path / f"p{suffix}"
    _write(df, path)
    whole = _load_in_memory(path, TableSpec())
    for batch_rows in (64, 1 << 20):
        streamed = stream_tensor(path, batch_rows=batch_rows).tensor
        assert streamed.dims == whole.dims
        for dim in whole.dims:
            assert streamed.coords[dim].values.tolist() == whole.coords[dim].values.tolist()
            assert streamed.coords[dim].dtype == whole.coords[dim].dtype
        np.testing.assert_array_equal(streamed.values, whole.values)
        assert streamed.dtype == whole.dtype
        assert streamed.attrs == whole.attrs
    if kind == "text":
        # pandas + tally_frame directly, and the reference library
        ref = tally_frame(pd.read_csv(path) if suffix == ".csv" else df, by=fold)
        np.testing.assert_array_equal(streamed.values, ref.values)
        labels = sorted(set(df["actual"]) | set(df["predicted"]))
        assert streamed.coords["actual"].values.tolist() == labels


def test_csv_with_bom_crlf_and_quotes_reads_like_its_clean_twin(tmp_path):
    # Byte-order mark, CRLF line ends and quoted fields (RFC 4180; common practice of
    # CSV producers) must not change anything.
    clean = "actual,predicted,fold\ncat,dog,1\n\"big, cat\",cat,1\ndog,dog,2\ncat,cat,2\n"
    messy = ("\ufeff\"actual\",\"predicted\",\"fold\"\r\n\"cat\",\"dog\",1\r\n"
             "\"big, cat\",\"cat\",\"1\"\r\ndog,\"dog\",2\r\n\"cat\",cat,2\r\n")
    (tmp_path / "clean.csv").write_text(clean, encoding="utf-8")
    (tmp_path / "messy.csv").write_bytes(messy.encode("utf-8"))
    a = load_tensor(tmp_path / "clean.csv")
    b = load_tensor(tmp_path / "messy.csv")
    assert a.coords["actual"].values.tolist() == b.coords["actual"].values.tolist() == [
        "big, cat", "cat", "dog"]
    np.testing.assert_array_equal(a.values, b.values)
    df = pd.read_csv(tmp_path / "clean.csv")
    labels = ["big, cat", "cat", "dog"]
    np.testing.assert_array_equal(b.values, _sklearn_tensor(df, labels, [1, 2]))


def test_classes_fixed_order_and_integer_classes(tmp_path):
    p = tmp_path / "p.csv"
    p.write_text("actual,predicted\n1,1\n2,3\n3,3\n")
    t = load_tensor(p, TableSpec(classes=("3", "2", "1", "4")))
    # issue 12: CSV labels stay text (they were integers before)
    assert t.coords["actual"].values.tolist() == ["3", "2", "1", "4"]
    # sklearn.metrics.confusion_matrix with the same label order
    np.testing.assert_array_equal(t.values, confusion_matrix(["1", "2", "3"], ["1", "3", "3"],
                                                             labels=["3", "2", "1", "4"]))


ERRORS = {
    "missing truth": ("actual,predicted,fold\na,a,1\n,b,1\nb,,2\n", TableSpec(),
                      "column 'actual' row 2: missing label (2 missing in all)"),
    "missing pred": ("actual,predicted\na,a\na,b\nb,\n", TableSpec(),
                     "column 'predicted' row 3: missing label (1 missing in all)"),
    "missing fold": ("actual,predicted,fold\na,a,1\na,b,\n", TableSpec(),
                     "column 'fold' row 2: missing value"),
    "negative weight": ("actual,predicted,w\na,a,1\na,b,-2\n", TableSpec(weight="w"),
                        "weights must be finite and non-negative; got -2.0 at row 2"),
    "outside classes": ("actual,predicted\na,a\nb,c\nz,b\nq,b\n", TableSpec(classes=("a", "b", "c")),
                        "column 'actual' row 3: label 'z' is not among the classes "
                        "['a', 'b', 'c'] (2 rows outside them)"),
    "missing column": ("actual,pred\na,a\n", TableSpec(),
                       "column 'predicted' not found; the table has ['actual', 'pred']"),
    "header only": ("actual,predicted\n", TableSpec(), "the table has no rows"),
    "empty": ("", TableSpec(), "the file is empty"),
}


@pytest.mark.parametrize("case", list(ERRORS))
def test_error_messages_name_file_column_row_as_the_whole_table_path(tmp_path, case):
    text, spec, message = ERRORS[case]
    p = tmp_path / "bad.csv"
    p.write_text(text)
    with pytest.raises(InvalidInputError) as whole:
        _load_in_memory(p, spec)
    for batch_rows in (1, 1 << 20):
        with pytest.raises(InvalidInputError) as streamed:
            stream_tensor(p, truth=spec.truth, pred=spec.pred, fold=spec.fold,
                          weight=spec.weight, classes=spec.classes, batch_rows=batch_rows)
        assert str(streamed.value) == str(whole.value) == f"bad.csv: {message}"


def test_error_in_a_later_file_names_that_file(tmp_path):
    (tmp_path / "a.csv").write_text("actual,predicted\nx,x\ny,y\n")
    (tmp_path / "b.csv").write_text("actual,predicted\nx,x\nx,\n")
    with pytest.raises(InvalidInputError, match=r"^b\.csv: column 'predicted' row 2: missing"):
        stream_tensor(tmp_path)


def test_glob_matching_nothing_and_empty_folder(tmp_path):
    with pytest.raises(InvalidInputError, match=r"the pattern '.*\*\.parquet' matches no file"):
        resolve_paths(tmp_path / "*.parquet")
    (tmp_path / "notes.txt").write_text("hello")
    with pytest.raises(InvalidInputError, match="the folder holds no table file"):
        resolve_paths(tmp_path)
    assert main(["score", str(tmp_path / "*.csv")]) == 2


def test_schemas_that_disagree_name_file_and_column(tmp_path):
    pd.DataFrame({"actual": ["a"], "predicted": ["a"]}).to_parquet(tmp_path / "p1.parquet")
    pd.DataFrame({"actual": [1], "predicted": ["a"]}).to_parquet(tmp_path / "p2.parquet")
    with pytest.raises(InvalidInputError,
                       match=r"^p2\.parquet: column 'actual' holds int values here but text "
                             r"values in p1\.parquet$"):
        stream_tensor(tmp_path)
    pd.DataFrame({"truth": ["a"], "predicted": ["a"]}).to_parquet(tmp_path / "p2.parquet")
    with pytest.raises(InvalidInputError, match=r"^p2\.parquet: column 'actual' not found"):
        stream_tensor(tmp_path)


def _corrupt_dataset(tmp_path):
    parts = _parts(seed=8, n_files=3)
    for i, df in enumerate(parts):
        df.to_parquet(tmp_path / f"part-{i}.parquet", row_group_size=50)
    # Overwrite the middle of the second file's data pages: its footer still reads,
    # so the damage shows only while rows are read (after some were counted).
    bad = tmp_path / "part-1.parquet"
    raw = bytearray(bad.read_bytes())
    mid = len(raw) // 2
    raw[mid - 400:mid + 400] = b"\x07" * 800
    bad.write_bytes(bytes(raw))
    return parts


def test_corrupt_file_in_the_middle_stops_or_is_skipped(tmp_path, capsys):
    parts = _corrupt_dataset(tmp_path)
    with pytest.raises(InvalidInputError, match=r"^part-1\.parquet: cannot read as parquet"):
        stream_tensor(tmp_path, batch_rows=20)
    out = tmp_path / "report.json"
    assert main(["score", str(tmp_path), "--output", str(out), "--quiet"]) == 2
    assert not out.exists()
    assert "part-1.parquet" in capsys.readouterr().err

    r = stream_tensor(tmp_path, batch_rows=20, skip_bad_files=True)
    assert [name for name, _ in r.skipped] == ["part-1.parquet"]
    good = pd.concat([parts[0], parts[2]], ignore_index=True)
    labels = sorted(set(good["actual"]) | set(good["predicted"]))
    assert r.tensor.coords["actual"].values.tolist() == labels
    # none of the damaged file's rows may be counted, even those read before the damage
    np.testing.assert_array_equal(r.tensor.values, _sklearn_tensor(good, labels, [1, 2, 3]))

    assert main(["score", str(tmp_path), "--skip-bad-files", "--format", "json",
                 "--output", str(out)]) == 0
    doc = json.loads(out.read_text())
    assert doc["n"] == len(good)
    assert any("part-1.parquet" in w for w in doc["warnings"])


@pytest.mark.parametrize("suffix", [".csv", ".parquet", ".jsonl"])
def test_where_filter_equals_pandas_query(tmp_path, suffix):
    rng = np.random.default_rng(4)
    n = 600
    df = pd.DataFrame({"actual": rng.choice(list("abcd"), n), "predicted": rng.choice(list("abcd"), n),
                       "split": rng.choice(["test", "train", "val"], n),
                       "fold": rng.integers(1, 5, n), "score": rng.random(n)})
    path = tmp_path / f"p{suffix}"
    _write(df, path)
    expr = '(split == "test" or split == "val") and not fold in (2, 4) and score >= 0.25'
    keep = df[df["split"].isin(["test", "val"]) & ~df["fold"].isin([2, 4]) & (df["score"] >= 0.25)]
    t = stream_tensor(path, where=expr, batch_rows=50).tensor
    labels = sorted(set(keep["actual"]) | set(keep["predicted"]))
    assert t.coords["fold"].values.tolist() == [1, 3]
    np.testing.assert_array_equal(t.values, _sklearn_tensor(keep, labels, [1, 3]))
    assert t.attrs["where"] == expr and t.attrs["n_rows"] == len(keep)


def test_where_syntax_and_unknown_column():
    assert parse_where("`cv round` != 'x'").tree == ("cmp", "cv round", "!=", "x")
    assert parse_where("a >= -1.5 or b == true").tree == (
        "or", ("cmp", "a", ">=", -1.5), ("cmp", "b", "==", True))
    for bad in ("split == ", "split == \"test\" extra", "(a == 1", "a in 1", "__import__('os')",
                "a == b"):
        with pytest.raises(InvalidInputError, match="`where`"):
            parse_where(bad)


def test_where_on_missing_column_and_no_rows_left(tmp_path):
    p = tmp_path / "p.parquet"
    pd.DataFrame({"actual": ["a", "b"], "predicted": ["a", "a"], "split": ["x", "y"]}).to_parquet(p)
    with pytest.raises(InvalidInputError, match="`where` names column 'kind'"):
        stream_tensor(p, where='kind == "x"')
    with pytest.raises(InvalidInputError, match="^p.parquet: no rows pass the filter"):
        stream_tensor(p, where='split == "z"')


def test_integer_codes_switch_to_a_dictionary_when_labels_grow(tmp_path):
    a = pd.DataFrame({"actual": [0, 1, 2, 1], "predicted": [0, 2, 2, 1]})
    b = pd.DataFrame({"actual": [50_000, 1, -3], "predicted": [1, 50_000, -3]})
    a.to_parquet(tmp_path / "a.parquet")
    b.to_parquet(tmp_path / "b.parquet")
    t = stream_tensor(tmp_path).tensor
    both = pd.concat([a, b])
    labels = [-3, 0, 1, 2, 50_000]
    assert t.coords["actual"].values.tolist() == labels
    np.testing.assert_array_equal(t.values, confusion_matrix(both["actual"], both["predicted"],
                                                             labels=labels))


def test_merge_of_partial_tallies_equals_one_pass():
    import pyarrow as pa

    rng = np.random.default_rng(9)
    tables = [pa.table({"actual": rng.choice(list("pqrstu"[: 3 + i]), 200),
                        "predicted": rng.choice(list("pqrstu"[: 2 + i]), 200),
                        "fold": rng.integers(i, i + 3, 200)}) for i in range(4)]
    one = StreamTally(fold="fold")
    for t in tables:
        one.add(t)
    parts = []
    for t in reversed(tables):          # other codes in every part
        p = StreamTally(fold="fold")
        p.add(t)
        parts.append(p)
    merged = parts[0]
    for p in parts[1:]:
        merged.merge(p)
    a, b = one.tensor(), merged.tensor()
    assert a.coords["actual"].values.tolist() == b.coords["actual"].values.tolist()
    np.testing.assert_array_equal(a.values, b.values)
    whole = pa.concat_tables(tables).to_pandas()
    labels = sorted(set(whole["actual"]) | set(whole["predicted"]))
    folds = sorted(set(whole["fold"]))
    np.testing.assert_array_equal(b.values, _sklearn_tensor(whole, labels, folds))


def test_cli_score_of_a_glob_equals_the_concatenated_file(tmp_path, capsys):
    parts = _parts(seed=12, n_files=3)
    for i, df in enumerate(parts):
        df.to_csv(tmp_path / f"run-{i}.csv", index=False)
    pd.concat(parts).to_csv(tmp_path / "all.csv.bak", index=False)
    (tmp_path / "whole").mkdir()
    (tmp_path / "all.csv.bak").rename(tmp_path / "whole" / "all.csv")
    assert main(["score", str(tmp_path / "run-*.csv"), "--format", "json", "--quiet"]) == 0
    a = json.loads(capsys.readouterr().out)
    assert main(["score", str(tmp_path / "whole" / "all.csv"), "--format", "json"]) == 0
    b = json.loads(capsys.readouterr().out)
    assert a["source"] == "run-*.csv" and b["source"] == "all.csv"
    a.pop("source"), b.pop("source")
    assert a == b


def test_progress_bar_gives_the_same_tensor(tmp_path, capsys):
    parts = _parts(seed=2, n_files=2)
    for i, df in enumerate(parts):
        df.to_parquet(tmp_path / f"p{i}.parquet")
    quiet = stream_tensor(tmp_path, progress=False).tensor
    shown = stream_tensor(tmp_path, progress=True, batch_rows=100).tensor
    np.testing.assert_array_equal(quiet.values, shown.values)
    assert capsys.readouterr().out == ""          # the bar never goes to stdout


def test_csv_label_text_that_reads_as_one_number_stays_apart(tmp_path):
    # issue 12 (changed behaviour): "1", "1.0" and "2.50" are three labels as typed; they
    # were one float class each before
    p = tmp_path / "p.csv"
    p.write_text("actual,predicted\n1,1.0\n1.0,2\n2.50,1\n1,1\n")
    t = stream_tensor(p, batch_rows=1).tensor
    assert t.coords["actual"].values.tolist() == ["1", "1.0", "2", "2.50"]
    # sklearn.metrics.confusion_matrix of the same rows as typed
    np.testing.assert_array_equal(t.values, confusion_matrix(["1", "1.0", "2.50", "1"],
                                                             ["1.0", "2", "1", "1"],
                                                             labels=["1", "1.0", "2", "2.50"]))
    assert t.values.tolist() == _load_in_memory(p).values.tolist()

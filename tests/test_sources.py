"""Reading prediction tables and count matrices, and every bad-input message."""

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import confusion_matrix

from foldcorr import InvalidInputError
from foldcorr.sources import TableSpec, load_tensor
from foldcorr.sources.matrix import read_matrix
from foldcorr.sources.tables import _load_in_memory


@pytest.fixture
def table():
    rng = np.random.default_rng(11)
    y = rng.choice(["alder", "birch", "cedar"], 200)
    p = np.where(rng.random(200) < 0.6, y, rng.choice(["alder", "birch", "cedar", "dogwood"], 200))
    return pd.DataFrame({"actual": y, "predicted": p, "fold": rng.integers(1, 4, 200),
                         "w": rng.random(200)})


@pytest.mark.parametrize("suffix", [".csv", ".parquet", ".jsonl", ".tsv"])
def test_formats_read_the_same_tensor(tmp_path, table, suffix):
    # Reference: sklearn.metrics.confusion_matrix per fold on the in-memory table.
    path = tmp_path / f"p{suffix}"
    if suffix == ".csv":
        table.to_csv(path, index=False)
    elif suffix == ".tsv":
        table.to_csv(path, index=False, sep="\t")
    elif suffix == ".parquet":
        table.to_parquet(path)
    else:
        table.to_json(path, orient="records", lines=True)
    t = load_tensor(path)
    labels = t.coords["actual"].values
    assert labels.tolist() == ["alder", "birch", "cedar", "dogwood"]
    for fold in (1, 2, 3):
        sub = table[table.fold == fold]
        np.testing.assert_array_equal(t.sel(fold=fold).values,
                                      confusion_matrix(sub.actual, sub.predicted, labels=labels))
    assert t.attrs["source"] == path.name


def test_weight_and_explicit_columns(tmp_path, table):
    path = tmp_path / "p.csv"
    table.rename(columns={"actual": "y", "predicted": "yhat", "fold": "cv"}).to_csv(path, index=False)
    t = load_tensor(path, TableSpec(truth="y", pred="yhat", fold="cv", weight="w"))
    ref = confusion_matrix(table.actual, table.predicted, labels=t.coords["actual"].values,
                           sample_weight=table.w)
    np.testing.assert_allclose(t.sum("fold").values, ref)
    assert t.attrs["fold_column"] == "cv"


def test_numeric_classes_option_is_matched_to_csv_label_text(tmp_path):
    # issue 12: CSV labels stay text, so --classes 2,1,3 names the texts "2", "1", "3"
    path = tmp_path / "p.csv"
    path.write_text("actual,predicted\n1,2\n2,2\n")
    t = load_tensor(path, TableSpec(classes=("2", "1", "3")))
    assert t.coords["actual"].values.tolist() == ["2", "1", "3"]


def write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text)
    return path


@pytest.mark.parametrize(
    "name, text, spec, message",
    [
        ("p.csv", "actual,guess\na,b\n", TableSpec(), r"p.csv: column 'predicted' not found; the table has \['actual', 'guess'\]"),
        ("p.csv", "", TableSpec(), r"p.csv: the file is empty"),
        ("p.csv", "actual,predicted\n", TableSpec(), r"p.csv: the table has no rows"),
        ("p.csv", "actual,predicted\na,b\n,b\n", TableSpec(), r"p.csv: column 'actual' row 2: missing label"),
        ("p.csv", "actual,predicted\na,b\nc,b\n", TableSpec(classes=("a", "b")), r"p.csv: column 'actual' row 2: label 'c' is not among the classes"),
        ("p.csv", "actual,predicted,fold\na,b,1\na,b,\n", TableSpec(), r"p.csv: column 'fold' row 2: missing value"),
        ("p.txt", "x", TableSpec(), r"p.txt: unknown file type '.txt'"),
        ("p.parquet", "not parquet", TableSpec(), r"p.parquet: cannot read as parquet"),
    ],
)
def test_bad_tables(tmp_path, name, text, spec, message):
    with pytest.raises(InvalidInputError, match=message):
        load_tensor(write(tmp_path, name, text), spec)


def test_missing_file(tmp_path):
    with pytest.raises(InvalidInputError, match=r"nope.csv: file not found"):
        load_tensor(tmp_path / "nope.csv")


def test_matrix_reads_and_reorders_columns(tmp_path):
    t = read_matrix(write(tmp_path, "m.csv", "actual\\predicted,dog,cat\ncat,1,5\ndog,7,2\n"))
    assert t.coords["actual"].values.tolist() == ["cat", "dog"]
    assert t.values.tolist() == [[5, 1], [2, 7]]
    assert t.attrs["n_rows"] == 15


@pytest.mark.parametrize(
    "text, message",
    [
        (",a,b\na,1,2\n", r"must be square; got 1 rows and 2 columns"),
        (",a,b\na,1,2\nc,3,4\n", r"row and column labels differ: rows only \['c'\], columns only \['b'\]"),
        (",a,b\na,1,-2\nb,3,4\n", r"row 'a' column 'b' \(line 2\): cell '-2' is not a non-negative integer"),
        (",a,b\na,1,2.5\nb,3,4\n", r"row 'a' column 'b' \(line 2\): cell '2.5' is not a non-negative integer"),
        (",a,b\na,1,2\nb,,4\n", r"row 'b' column 'a' \(line 3\): cell is empty"),
        (",a,a\na,1,2\na,3,4\n", r"row label 'a' appears more than once"),
        (",a\n", r"needs a header row, a label column and at least one cell"),
    ],
)
def test_bad_matrices(tmp_path, text, message):
    with pytest.raises(InvalidInputError, match=message):
        read_matrix(write(tmp_path, "m.csv", text))


def test_matrix_classes_must_match(tmp_path):
    path = write(tmp_path, "m.csv", ",a,b\na,1,2\nb,3,4\n")
    t = load_tensor(path, TableSpec(classes=("b", "a")), matrix=True)
    assert t.values.tolist() == [[4, 3], [2, 1]]
    with pytest.raises(InvalidInputError, match=r"not in the matrix \['z'\]"):
        load_tensor(path, TableSpec(classes=("a", "b", "z")), matrix=True)


@pytest.mark.parametrize("name, text, line", [
    ("p.csv", "actual,predicted\na,b\nc,d,e\nf,g\n", 3),
    ("p.csv", 'actual,predicted\n"a\nb",b\nc,d\ne,f,g\n', 5),     # a quoted newline is a line
    ("p.tsv", "actual\tpredicted\na\tb\n\nc\td\te\n", 4),
    ("p.jsonl", '{"actual": "a", "predicted": "b"}\n{"actual": "a",\n', 2),
    ("p.jsonl", '{"actual": "a", "predicted": "b"}\n\n{"actual": "a" "predicted": "b"}\n', 3),
])
def test_parse_errors_name_the_1_based_line(tmp_path, name, text, line):
    # issue 12: CSV and JSON Lines errors give the line number as an editor counts it
    path = tmp_path / name
    path.write_text(text)
    for read in (load_tensor, _load_in_memory):
        with pytest.raises(InvalidInputError, match=rf"^{name}: cannot read as \w+: line {line}: "):
            read(path)

"""The label rule (docs/conventions.md, issue 12): label text is never changed, two labels are
one class only if equal as the source typed them, and every source and engine agrees.

Tensors are checked against ``sklearn.metrics.confusion_matrix`` of the same rows as typed.
"""

import csv
import json
import warnings

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sklearn.metrics import confusion_matrix

from foldcorr.errors import LabelTypeWarning
from foldcorr.sources import load
from foldcorr.sources.saved import load_saved, save_evaluation
from foldcorr.sources.tables import _load_in_memory

# Label pairs the rule keeps apart in a CSV (each was merged into one class before).
APART = {"01/1": ("01", "1"), "007/7": ("007", "7"), "1e3/1000": ("1e3", "1000"),
         "1/1.0": ("1", "1.0"), "spaces": (" a", "a"), "trailing space": ("a ", "a")}


def write_csv(path, truth, pred, folds=None):
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(["actual", "predicted"] + (["fold"] if folds is not None else []))
        rows = zip(truth, pred) if folds is None else zip(truth, pred, folds)
        writer.writerows(rows)


def expected(truth, pred):
    classes = sorted(set(truth) | set(pred))
    return classes, confusion_matrix(truth, pred, labels=classes)


@pytest.mark.parametrize("case", sorted(APART))
def test_csv_labels_that_look_alike_stay_apart(tmp_path, case):
    a, b = APART[case]
    truth, pred = [a, b, a, b], [b, b, a, a]
    path = tmp_path / "p.csv"
    write_csv(path, truth, pred)
    classes, counts = expected(truth, pred)           # sklearn.metrics.confusion_matrix
    for t in (load(path), _load_in_memory(path)):
        assert t.coords["actual"].values.tolist() == classes
        np.testing.assert_array_equal(t.values, counts)


def test_csv_folds_keep_their_numeric_order(tmp_path):
    path = tmp_path / "p.csv"
    write_csv(path, ["a", "b", "a"], ["a", "a", "b"], folds=["10", "2", "2"])
    for t in (load(path), _load_in_memory(path)):
        assert t.coords["fold"].values.tolist() == [2, 10]


def test_numeric_column_beside_numeric_looking_text_warns_and_compares_as_text(tmp_path):
    path = tmp_path / "p.parquet"
    pq.write_table(pa.table({"actual": [1, 2, 1], "predicted": ["1", "2", "01"]}), path)
    for read in (load, _load_in_memory):
        with pytest.warns(LabelTypeWarning, match="compared as text"):
            t = read(path)
        classes, counts = expected(["1", "2", "1"], ["1", "2", "01"])
        assert t.coords["actual"].values.tolist() == classes
        np.testing.assert_array_equal(t.values, counts)


def test_text_that_does_not_read_as_numbers_gives_no_warning(tmp_path):
    path = tmp_path / "p.parquet"
    pq.write_table(pa.table({"actual": [1, 2], "predicted": ["1", "x"]}), path)
    with warnings.catch_warnings():
        warnings.simplefilter("error", LabelTypeWarning)
        assert load(path).coords["actual"].values.tolist() == ["1", "2", "x"]


def test_integer_and_float_columns_are_compared_as_numbers(tmp_path):
    path = tmp_path / "p.parquet"
    pq.write_table(pa.table({"actual": [1, 2], "predicted": [1.0, 2.0]}), path)
    assert load(path).values.tolist() == [[1, 0], [0, 1]]


def test_command_line_warning_is_one_line(tmp_path, capsys):
    from foldcorr.cli import main

    path = tmp_path / "p.parquet"
    pq.write_table(pa.table({"actual": [1, 2, 1], "predicted": ["1", "2", "01"]}), path)
    assert main(["score", str(path), "--format", "json"]) == 0
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 1 and err[0].startswith("foldcorr: warning: column 'actual' holds numbers")


# Text drawn to be hard on a reader: numbers in several spellings, words pandas reads as
# missing, whitespace, quotes and separators, non-ASCII letters.
TRICKY = ["01", "1", "1.0", "007", "7", "1e3", "1000", "NA", "None", "null", "NaN", "True",
          " a", "a ", " ", "a,b", 'say "hi"', "tab\there", "ünï", "-0", "+1", "0x1F"]
LABEL = st.one_of(st.sampled_from(TRICKY),
                  st.text(st.characters(blacklist_categories=("Cs", "Cc"),
                                        blacklist_characters="\ufeff"), min_size=1, max_size=5))
ROWS = st.lists(st.tuples(LABEL, LABEL), min_size=1, max_size=12)


def _sources(tmp_path, truth, pred):
    """Every kind of source holding the same rows, the labels typed as text."""
    csv_path, pq_path, js_path = tmp_path / "p.csv", tmp_path / "p.parquet", tmp_path / "p.jsonl"
    write_csv(csv_path, truth, pred)
    pq.write_table(pa.table({"actual": truth, "predicted": pred}), pq_path)
    js_path.write_text("".join(json.dumps({"actual": a, "predicted": b}) + "\n"
                               for a, b in zip(truth, pred)), encoding="utf-8")
    frame = pd.DataFrame({"actual": pd.Series(truth, dtype=object),
                          "predicted": pd.Series(pred, dtype=object)})
    return {"csv": csv_path, "parquet": pq_path, "jsonl": js_path, "pandas frame": frame,
            "arrow table": pa.table({"actual": truth, "predicted": pred})}


@settings(max_examples=20, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=ROWS)
def test_label_text_round_trips_unchanged_through_every_source(tmp_path, rows):
    truth, pred = [a for a, _ in rows], [b for _, b in rows]
    classes, counts = expected(truth, pred)           # sklearn.metrics.confusion_matrix
    for kind, source in _sources(tmp_path, truth, pred).items():
        t = load(source, fold=None)
        assert t.coords["actual"].values.tolist() == classes, kind
        np.testing.assert_array_equal(t.values, counts, err_msg=kind)
        if not isinstance(source, (pd.DataFrame, pa.Table)):
            whole = _load_in_memory(source)            # the pandas read path
            assert whole.coords["actual"].values.tolist() == classes, kind
    saved = save_evaluation(tmp_path / "run.nc", t)
    assert load_saved(saved).tensor.coords["actual"].values.tolist() == classes


@settings(max_examples=15, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(labels=st.lists(LABEL.filter(str.strip), min_size=1,  # a blank name heads no row
                       max_size=5, unique=True))
def test_counts_matrix_labels_round_trip_unchanged(tmp_path, labels):
    path = tmp_path / "m.csv"
    counts = np.arange(len(labels) ** 2).reshape(len(labels), -1) + 1
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow([""] + labels)
        writer.writerows([label, *row] for label, row in zip(labels, counts.tolist()))
    t = load(path, matrix=True)
    assert sorted(t.coords["actual"].values.tolist()) == sorted(labels)
    np.testing.assert_array_equal(t.sel(actual=labels, predicted=labels).values, counts)


@pytest.mark.parametrize("suffix", [".csv", ".parquet", ".jsonl"])
def test_na_values_name_the_texts_that_are_missing(tmp_path, suffix):
    truth, pred = ["NA", "b", "a"], ["a", "b", "NA"]
    path = tmp_path / f"p{suffix}"
    if suffix == ".csv":
        write_csv(path, truth, pred)
    else:
        _sources(tmp_path, truth, pred)
    assert "NA" in load(path).coords["actual"].values.tolist()       # default: a class
    with pytest.raises(ValueError, match=r"column 'actual' row 1: missing label"):
        load(path, na_values=["NA"])


def test_na_values_on_the_command_line(tmp_path, capsys):
    from foldcorr.cli import main

    path = tmp_path / "p.csv"
    write_csv(path, ["a", "b", "a"], ["a", "b", "n/a"])
    assert main(["score", str(path), "--na-values", "n/a,NA"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "column 'predicted' row 3: missing label" in err[0]
    assert main(["score", str(path), "--matrix", "--na-values", "NA"]) == 2
    assert "`--na-values` applies to prediction tables" in capsys.readouterr().err

"""Label text read as the source holds it: missing means an empty cell only, and
whitespace is kept in counts matrices as in tables.
"""

import csv
import json

import pytest

from foldcorr.sources import load
from foldcorr.sources.tables import _load_in_memory


def write_csv(path, truth, pred):
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(["actual", "predicted"])
        writer.writerows(zip(truth, pred))


@pytest.mark.parametrize("name", ["NA", "None", "null", "NaN", "n/a", "NULL"])
def test_missing_value_words_are_classes(tmp_path, name):
    path = tmp_path / "p.csv"
    write_csv(path, [name, "b", name], [name, "b", "b"])
    assert sorted(load(path).coords["actual"].values.tolist()) == sorted([name, "b"])
    assert sorted(_load_in_memory(path).coords["actual"].values.tolist()) == sorted([name, "b"])


def test_empty_cell_is_still_missing(tmp_path):
    path = tmp_path / "p.csv"
    path.write_text("actual,predicted\na,a\n,b\n")
    with pytest.raises(ValueError, match="missing label"):
        load(path)


def test_json_lines_text_that_reads_as_numbers_stays_text(tmp_path):
    path = tmp_path / "p.jsonl"
    path.write_text("".join(json.dumps({"actual": a, "predicted": b}) + "\n"
                            for a, b in [("01", "01"), ("02", "x")]))
    assert load(path).coords["actual"].values.tolist() == ["01", "02", "x"]
    assert _load_in_memory(path).coords["actual"].values.tolist() == ["01", "02", "x"]


def test_counts_matrix_keeps_whitespace(tmp_path):
    path = tmp_path / "m.csv"
    path.write_text(", a,a\n a,1,0\na,0,1\n")
    assert load(path, matrix=True).coords["actual"].values.tolist() == [" a", "a"]

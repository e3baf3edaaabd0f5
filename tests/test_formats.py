"""File formats: one object per kind of file, listed once; one `load` over all of them."""

import subprocess
import sys

import pandas as pd
import pytest

from foldcorr import InvalidInputError, OptionError
from foldcorr.sources import FORMATS, format_for, load
from foldcorr.sources.formats import (
    TABLE_FORMATS,
    TABLE_SUFFIXES,
    CountsMatrixFormat,
    CsvFormat,
    JsonLinesFormat,
    MemoryFormat,
    NetcdfFormat,
    ParquetFormat,
    format_of,
)
from foldcorr.sources.saved import save_evaluation
from foldcorr.testing import assert_tensor_equal

ENDINGS = {CsvFormat: (".csv", ".tsv"), ParquetFormat: (".parquet", ".pq"),
           JsonLinesFormat: (".jsonl", ".ndjson"), NetcdfFormat: (".nc", ".nc4")}


def test_the_registry_lists_each_kind_of_file_once():
    assert [type(f) for f in FORMATS] == [NetcdfFormat, CountsMatrixFormat, CsvFormat,
                                          ParquetFormat, JsonLinesFormat, MemoryFormat]
    assert [f.name for f in TABLE_FORMATS] == ["csv", "parquet", "jsonl", "table in memory"]
    assert TABLE_SUFFIXES == {".csv": "csv", ".tsv": "tsv", ".parquet": "parquet",
                              ".pq": "parquet", ".jsonl": "jsonl", ".ndjson": "jsonl"}


@pytest.mark.parametrize("kind, endings", ENDINGS.items())
def test_each_format_answers_for_its_endings(kind, endings):
    for ending in endings:
        for name in (f"runs/p{ending}", f"P{ending.upper()}"):
            assert isinstance(format_for(name), kind)
            assert [type(f) for f in FORMATS if f.can_open(name)] == [kind]


def test_a_counts_matrix_is_read_when_asked_for_and_a_saved_file_wins():
    assert isinstance(format_for("m.csv", matrix=True), CountsMatrixFormat)
    assert isinstance(format_for("m.txt", matrix=True), CountsMatrixFormat)
    assert isinstance(format_for("run.nc", matrix=True), NetcdfFormat)
    assert not CountsMatrixFormat().can_open("m.csv")


def test_an_unknown_ending_names_the_known_ones():
    with pytest.raises(InvalidInputError, match=r"p.txt: unknown file type '.txt'; expected one "
                                                r"of .csv, .jsonl, .nc, .nc4, .ndjson, .parquet"):
        format_for("p.txt")
    with pytest.raises(InvalidInputError, match=r"expected one of .csv, .jsonl, .ndjson, "
                                                r".parquet, .pq, .tsv$"):
        format_of("p.nc")


@pytest.fixture
def table():
    return pd.DataFrame({"actual": ["a", "b", "b", "c"], "predicted": ["a", "a", "b", "c"],
                         "fold": [1, 1, 2, 2]})


def _write(df, path):
    if path.suffix == ".parquet":
        df.to_parquet(path, index=False)
    elif path.suffix == ".jsonl":
        df.to_json(path, orient="records", lines=True)
    else:
        df.to_csv(path, index=False, sep="\t" if path.suffix == ".tsv" else ",")


@pytest.mark.parametrize("ending", [".csv", ".tsv", ".parquet", ".jsonl"])
def test_both_paths_read_a_table_through_its_format(tmp_path, table, ending):
    path = tmp_path / f"p{ending}"
    _write(table, path)
    fmt = format_for(path)
    frame = fmt.frame(path, ["actual", "predicted"])
    assert frame.to_dict("list") == table[["actual", "predicted"]].to_dict("list")
    rows = [b.to_pydict() for b in fmt.batches(path, ["actual"], ["actual"], None, 100)]
    assert sum((r["actual"] for r in rows), []) == table["actual"].tolist()
    assert fmt.schema(path).names == ["actual", "predicted", "fold"]


def test_load_reads_every_kind_of_file_to_the_same_tensor(tmp_path, table):
    expected = None
    for ending in (".csv", ".tsv", ".parquet", ".jsonl"):
        path = tmp_path / f"p{ending}"
        _write(table, path)
        t = load(path, fold=None)
        if expected is None:
            expected = t
        assert t.values.tolist() == expected.values.tolist()
    save_evaluation(tmp_path / "run.nc", expected)
    assert_tensor_equal(load(tmp_path / "run.nc"), expected)
    (tmp_path / "m.csv").write_text(",a,b,c\na,1,0,0\nb,1,1,0\nc,0,0,1\n")
    assert load(tmp_path / "m.csv", matrix=True).values.tolist() == expected.values.tolist()
    with pytest.raises(OptionError, match="run.nc is a saved evaluation.*`where`"):
        load(tmp_path / "run.nc", where="fold == 1")


def test_importing_the_sources_layer_loads_no_reader():
    code = ("import sys, foldcorr.sources; "
            "print(','.join(m for m in ('pandas', 'pyarrow', 'dask', 'rich', 'xarray') "
            "if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""

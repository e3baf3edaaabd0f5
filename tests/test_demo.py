"""The invented demo: deterministic, long-tailed, with its look-alike confusions."""

import pathlib

import numpy as np
import pandas as pd
import pytest

import foldcorr as fc
from foldcorr.sources.demo import SYSTEMATIC, TAXA, make_demo
from foldcorr.sources import load_tensor

FIXTURES = pathlib.Path(__file__).parent.parent / "fixtures"


def test_fixture_copy_is_what_the_generator_makes():
    fixture = pd.read_csv(FIXTURES / "plankton_small.csv")
    pd.testing.assert_frame_equal(make_demo(1500), fixture, check_dtype=False)


def test_counts_fixture_is_the_pooled_tensor_of_the_small_demo():
    table = fc.pool(load_tensor(FIXTURES / "plankton_small.csv"))
    matrix = load_tensor(FIXTURES / "plankton_small_counts.csv", matrix=True)
    assert table.coords["actual"].values.tolist() == matrix.coords["actual"].values.tolist()
    np.testing.assert_array_equal(table.values, matrix.values)


def test_demo_shape_of_the_scenario():
    df = make_demo(24_000)
    assert df["actual"].nunique() == len(TAXA) >= 30
    counts = df["actual"].value_counts()
    assert counts.iloc[0] > 20 * counts.iloc[-1]  # long tail
    for source, target, share in SYSTEMATIC:
        rows = df[df.actual == source]
        assert (rows.predicted == target).mean() > share * 0.7
    assert sorted(df["fold"].unique()) == [1, 2, 3, 4, 5]


def test_demo_out_on_an_existing_file_is_one_error_line(tmp_path, capsys):
    from foldcorr.cli import main
    from foldcorr.sources.demo import write_demo
    from foldcorr.errors import InvalidInputError

    taken = tmp_path / "notes.txt"
    taken.write_text("keep me")
    with pytest.raises(InvalidInputError, match=r"the demo folder \(`folder`, --out\) '.*notes"
                                                r"\.txt' is an existing file; give a folder"):
        write_demo(taken, n=100)
    assert main(["demo", "--out", str(taken), "--samples", "200"]) == 2
    err = capsys.readouterr().err
    assert "is an existing file" in err and err.count("\n") == 1
    assert taken.read_text() == "keep me"
    with pytest.raises(InvalidInputError, match="cannot create the demo folder"):
        write_demo(taken / "inside", n=100)

"""CSV column types over many blocks: weights and --where columns are not guessed from block 1."""

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import confusion_matrix

import foldcorr.sources.formats as formats
from foldcorr.cli import main
from foldcorr.errors import InvalidInputError
from foldcorr.sources import tally_dataset

LABELS = ["diatom", "copepod", "larva"]


@pytest.fixture(autouse=True)
def small_blocks(monkeypatch):
    # 512-byte blocks: the tables below span dozens of blocks, so a type guessed from the
    # first block would be wrong later on.
    monkeypatch.setattr(formats, "BLOCK_BYTES", 512)


@pytest.fixture
def table(tmp_path):
    # An invented plankton imager: 600 images; the late rows differ in kind from the early ones.
    rng = np.random.default_rng(8)
    n = 600
    y = rng.choice(LABELS, n)
    p = np.where(rng.random(n) < 0.6, y, rng.choice(LABELS, n))
    weight = np.ones(n)
    weight[-40:] = rng.choice([0.5, 2.25], 40)
    split = np.array(["1"] * (n - 100) + list(rng.choice(["test", "1", "train"], 100)),
                     dtype=object)
    df = pd.DataFrame({"actual": y, "predicted": p, "w": weight, "split": split,
                       "fold": np.arange(n) % 12 + 1})
    path = tmp_path / "imager.csv"
    df.to_csv(path, index=False)
    assert path.stat().st_size > 20 * 512
    text = path.read_text().replace(",1.0,", ",1,")   # whole weights written as integers
    path.write_text(text)
    assert ",1," in text.splitlines()[1]
    return path, df


def reference(df):
    # Reference: sklearn.metrics.confusion_matrix (with sample_weight for weights).
    return confusion_matrix(df.actual, df.predicted, labels=sorted(LABELS),
                            sample_weight=df.w if "w" in df else None)


def pooled(result):
    t = result.tensor
    t = t.sum("fold") if "fold" in t.dims else t
    return t.sel(actual=sorted(LABELS), predicted=sorted(LABELS)).values


def test_weights_integer_early_fractional_late(table):
    path, df = table
    got = pooled(tally_dataset(path, weight="w"))
    assert np.allclose(got, reference(df), rtol=0, atol=1e-9)


def test_where_column_numeric_early_text_late(table):
    path, df = table
    keep = df[df.split == "test"]
    got = pooled(tally_dataset(path, where='split == "test"'))
    assert (got == reference(keep.drop(columns="w"))).all()
    keep = df[df.split == "1"]      # a number compared with a text column: "1" reads as 1
    got = pooled(tally_dataset(path, where="split == 1"))
    assert (got == reference(keep.drop(columns="w"))).all()
    keep = df[df.split != "1"]
    got = pooled(tally_dataset(path, where="split != 1"))
    assert (got == reference(keep.drop(columns="w"))).all()


def test_where_orders_numbers_read_as_text(table):
    # fold < 10 must be numeric, not the text order in which "10" < "9".
    path, df = table
    keep = df[(df.fold < 10) & df.fold.isin([1, 11, 12, 9])]
    got = pooled(tally_dataset(path, where="fold < 10 and fold in (1, 11, 12, 9)"))
    assert (got == reference(keep.drop(columns="w"))).all()
    with pytest.raises(InvalidInputError, match=r"imager.csv: `where` 'split > 0' orders a column "
                                                r"against a number, but the column holds text"):
        tally_dataset(path, where="split > 0")


def test_where_on_the_weight_column(table):
    path, df = table
    keep = df[df.w > 1]
    got = pooled(tally_dataset(path, weight="w", where="w > 1"))
    assert np.allclose(got, reference(keep), atol=1e-9)


def test_cli_weight_and_where_over_many_blocks(table, capsys):
    import json

    path, df = table
    code = main(["score", str(path), "--weight", "w", "--where", 'split == "test"',
                 "--format", "json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    keep = df[df.split == "test"]
    assert abs(json.loads(out)["n"] - keep.w.sum()) < 1e-9


def test_non_numeric_weight_is_a_data_error(tmp_path, capsys):
    path = tmp_path / "w.csv"
    path.write_text("actual,predicted,w\n" + "a,a,1\n" * 200 + "b,a,heavy\n")
    with pytest.raises(InvalidInputError, match=r"w.csv: weights must be numbers"):
        tally_dataset(path, weight="w")
    code = main(["score", str(path), "--weight", "w", "--skip-bad-files"])
    _, err = capsys.readouterr()
    assert code == 2 and "weights must be numbers" in err and len(err.strip().splitlines()) == 1


@pytest.mark.parametrize("suffix", [".csv", ".parquet", ".jsonl"])
def test_where_naming_a_missing_column(tmp_path, capsys, suffix):
    df = pd.DataFrame({"actual": ["a", "b", "b"], "predicted": ["a", "a", "b"]})
    folder = tmp_path / "runs"
    folder.mkdir()
    for name in ("p1", "p2"):
        path = folder / f"{name}{suffix}"
        if suffix == ".csv":
            df.to_csv(path, index=False)
        elif suffix == ".parquet":
            df.to_parquet(path)
        else:
            df.to_json(path, orient="records", lines=True)
    expected = (rf"p1{suffix}: `where` names column 'split', which the table does not have; "
                r"it has \['actual', 'predicted'\]")
    with pytest.raises(InvalidInputError, match=expected):
        tally_dataset(folder, where='split == "test"')
    for extra in ([], ["--skip-bad-files"]):
        code = main(["score", str(folder), "--where", 'split == "test"', *extra])
        out, err = capsys.readouterr()
        assert code == 2 and out == "" and len(err.strip().splitlines()) == 1
        assert "names column 'split'" in err and "unreadable" not in err
        assert "readable file" not in err

"""compare on the command line: every offered format works; messages name the real columns."""

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import matthews_corrcoef

from foldcorr.cli import get_parser, main


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def table(tmp_path):
    # Invented field-recording sound tagger, two models on the same clips.
    rng = np.random.default_rng(12)
    n = 240
    y = rng.choice(["frog", "cricket", "owl", "bat"], n)
    df = pd.DataFrame({"clip": [f"c{i}" for i in range(n)], "label": y,
                       "old": np.where(rng.random(n) < 0.6, y, rng.choice(["frog", "owl"], n)),
                       "new": np.where(rng.random(n) < 0.8, y, rng.choice(["frog", "owl"], n))})
    path = tmp_path / "clips.csv"
    df.to_csv(path, index=False)
    return path, df


def compare_formats():
    verbs = next(a for a in get_parser()._actions if a.dest == "verb")
    return next(a for a in verbs.choices["compare"]._actions if a.dest == "format").choices


@pytest.mark.parametrize("fmt", compare_formats())
def test_every_offered_format_renders(table, capsys, tmp_path, fmt):
    # The R_K of each model is Matthews' multiclass correlation: sklearn.metrics.matthews_corrcoef.
    path, df = table
    out = tmp_path / f"cmp.{fmt}"
    code, printed, err = run(capsys, "compare", path, "--truth", "label", "--pred-a", "old",
                             "--pred-b", "new", "--resamples", 200, "--seed", 1,
                             "--format", fmt, "--output", out)
    assert code == 0, err
    text = out.read_text()
    rk_a = matthews_corrcoef(df.label, df.old)
    rk_b = matthews_corrcoef(df.label, df.new)
    if fmt == "json":
        doc = json.loads(text)
        assert doc["schema"] == "foldcorr.compare/1"
    else:
        assert f"{rk_a:.3f}" in text and f"{rk_b:.3f}" in text
    if fmt == "html":
        assert text.startswith("<!DOCTYPE html>") and "foldcorr compare" in text


def test_messages_name_the_real_columns_one_table(table, capsys, tmp_path):
    path, df = table
    df = df.copy()
    df.loc[5, "new"] = None
    bad = tmp_path / "gap.csv"
    df.to_csv(bad, index=False)
    code, out, err = run(capsys, "compare", bad, "--truth", "label", "--pred-a", "old",
                         "--pred-b", "new", "--resamples", 100)
    assert code == 2 and out == "" and len(err.strip().splitlines()) == 1
    assert "gap.csv: column 'new' row 6: missing label (1 missing in all)" in err
    code, _, err = run(capsys, "compare", path, "--truth", "label", "--pred-a", "old",
                       "--pred-b", "new", "--classes", "frog,owl,bat", "--resamples", 100)
    first = int(np.flatnonzero(df.label == "cricket")[0]) + 1
    assert code == 2 and f"column 'label' row {first}: label 'cricket'" in err
    assert "'truth'" not in err and "pred_" not in err


def test_messages_name_the_second_table_and_its_own_rows(table, capsys, tmp_path):
    path, df = table
    a = df[["clip", "label", "old"]].rename(columns={"old": "guess"})
    b = df[["clip", "new"]].rename(columns={"new": "guess"}).iloc[::-1].reset_index(drop=True)
    b.loc[3, "guess"] = "moth"
    pa, pb = tmp_path / "a.csv", tmp_path / "b.csv"
    a.to_csv(pa, index=False)
    b.to_csv(pb, index=False)
    code, out, err = run(capsys, "compare", pa, pb, "--id", "clip", "--truth", "label",
                         "--pred", "guess", "--classes", "frog,cricket,owl,bat",
                         "--resamples", 100)
    assert code == 2 and out == "" and len(err.strip().splitlines()) == 1
    assert "b.csv: column 'guess' row 4: label 'moth' is not among the classes" in err
    b.loc[3, "guess"] = None
    b.to_csv(pb, index=False)
    code, _, err = run(capsys, "compare", pa, pb, "--id", "clip", "--truth", "label",
                       "--pred", "guess", "--resamples", 100)
    assert code == 2 and "b.csv: column 'guess' row 4: missing label" in err

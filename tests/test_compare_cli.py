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

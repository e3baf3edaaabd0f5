"""Command-line tests: score/demo intervals and the compare verb, run in-process."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import matthews_corrcoef

from foldcorr.cli import main


@pytest.fixture()
def tables(tmp_path):
    rng = np.random.default_rng(0)
    n = 600
    truth = rng.choice(["copepod", "diatom", "detritus"], n)
    a = np.where(rng.random(n) < 0.6, truth, rng.choice(["copepod", "diatom", "detritus"], n))
    b = np.where(rng.random(n) < 0.5, truth, a)
    fold = np.arange(n) % 3
    one = tmp_path / "two_models.csv"
    pd.DataFrame({"actual": truth, "old": a, "new": b, "fold": fold}).to_csv(one, index=False)
    ta, tb = tmp_path / "a.csv", tmp_path / "b.csv"
    ids = np.arange(n)
    pd.DataFrame({"id": ids, "actual": truth, "predicted": a, "fold": fold}).to_csv(ta, index=False)
    order = rng.permutation(n)
    pd.DataFrame({"id": ids[order], "predicted": b[order]}).to_csv(tb, index=False)
    return {"one": one, "a": ta, "b": tb, "truth": truth, "pa": a, "pb": b, "dir": tmp_path}


def _json(capsys, argv):
    assert main(argv) == 0
    return json.loads(capsys.readouterr().out)


def test_score_json_has_every_interval_key_and_is_reproducible(tables, capsys):
    argv = ["score", str(tables["a"]), "--ci", "0.9", "--resamples", "200", "--seed", "3",
            "--format", "json"]
    doc = _json(capsys, argv)
    low, high = doc["pooled"]["rk_ci"]
    assert low < doc["pooled"]["rk"] < high
    assert all(len(f["rk_ci"]) == 2 for f in doc["folds"])
    assert all(len(c["mcc_ci"]) == 2 and len(c["drag_ci"]) == 2 for c in doc["per_class"])
    lo, hi = doc["fold_summary"]["corrected_ci"]
    assert lo < doc["fold_summary"]["mean_rk"] < hi
    assert doc["ci"] == {"level": 0.9, "method": "percentile", "resamples": 200, "seed": 3,
                         "clusters": None, "design_effect": None}
    assert doc["pooled"]["rk"] == pytest.approx(matthews_corrcoef(tables["truth"], tables["pa"]))
    assert _json(capsys, argv) == doc


def test_score_text_and_markdown_show_intervals(tables, capsys):
    assert main(["score", str(tables["a"]), "--ci", "0.95", "--resamples", "100",
                 "--seed", "1", "--ci-method", "bca"]) == 0
    out = capsys.readouterr().out
    assert "95% CI" in out and "(bca, 100 resamples, seed 1)" in out and "Fold statistics" in out
    assert "Class intervals" in out and "R_K 95% CI" in out
    assert main(["score", str(tables["a"]), "--ci", "0.95", "--resamples", "100",
                 "--format", "markdown"]) == 0
    md = capsys.readouterr().out
    assert "| MCC 95% CI |" in md.replace("| MCC | MCC 95% CI |", "| MCC 95% CI |")


def test_score_without_ci_is_unchanged(tables, capsys):
    doc = _json(capsys, ["score", str(tables["a"]), "--format", "json"])
    assert "ci" not in doc and "rk_ci" not in doc["pooled"]


def test_demo_with_ci(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path), "--samples", "1000", "--ci", "0.95",
                 "--resamples", "100", "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["ci"]["seed"] == 20261201  # the demo's --seed also seeds the resamples


@pytest.mark.parametrize("argv, message", [
    (["--ci", "1.5"], "`--ci` must be a number strictly between 0 and 1 (e.g. 0.95); got 1.5"),
    (["--ci", "0.9", "--resamples", "20"], "`--resamples` must be a whole number of at least 100; got 20"),
    (["--resamples", "500"], "`--resamples` needs `--ci LEVEL`"),
    (["--ci-method", "bca"], "`--ci-method` needs `--ci LEVEL`"),
])
def test_score_bad_interval_options_exit_2_with_one_line(tables, capsys, argv, message):
    assert main(["score", str(tables["a"]), *argv]) == 2
    err = capsys.readouterr().err
    assert message in err and err.count("\n") == 1


def test_weighted_scores_refuse_intervals(tables, capsys, tmp_path):
    path = tmp_path / "w.csv"
    pd.DataFrame({"actual": ["a", "b", "a"], "predicted": ["a", "b", "b"],
                  "w": [0.5, 1.0, 2.0]}).to_csv(path, index=False)
    assert main(["score", str(path), "--weight", "w", "--ci", "0.95"]) == 2
    assert "weighted sums" in capsys.readouterr().err


@pytest.mark.parametrize("weight", [1, 10])
def test_whole_weights_refuse_intervals_too(tables, capsys, tmp_path, weight):
    # Weights of 10 are not 10 samples each: a weighted score gets no interval (README).
    path = tmp_path / "w.csv"
    df = pd.read_csv(tables["a"]).assign(w=weight)
    df.to_csv(path, index=False)
    assert main(["score", str(path), "--weight", "w", "--ci", "0.95"]) == 2
    err = capsys.readouterr().err
    assert "tallied with the weight column 'w'" in err and err.count("\n") == 1
    code = main(["gate", str(path), "--weight", "w", "--baseline", str(path),
                 "--max-drop", "0", "--confidence", "0.95", "--resamples", "100"])
    err = capsys.readouterr().err
    assert code == 2 and "weighted sums" in err and err.count("\n") == 1


def test_compare_one_table_json(tables, capsys):
    doc = _json(capsys, ["compare", str(tables["one"]), "--pred-a", "old", "--pred-b", "new",
                         "--resamples", "300", "--seed", "2", "--format", "json"])
    assert doc["schema"] == "foldcorr.compare/1"
    truth, a, b = tables["truth"], tables["pa"], tables["pb"]
    assert doc["a"]["rk"] == pytest.approx(matthews_corrcoef(truth, a))
    assert doc["b"]["rk"] == pytest.approx(matthews_corrcoef(truth, b))
    d = doc["difference"]
    assert set(d) >= {"estimate", "ci", "p_value", "resamples"} and d["resamples"] == 300
    assert d["ci"][0] < d["estimate"] < d["ci"][1]
    assert {"class", "mcc_a", "mcc_b", "difference", "ci"} <= set(doc["per_class"][0])
    assert [f["fold"] for f in doc["folds"]] == [0, 1, 2]
    assert {"fold", "rk_a", "rk_b", "difference"} <= set(doc["folds"][0])


def test_compare_two_tables_text_says_which_is_better(tables, capsys):
    assert main(["compare", str(tables["a"]), str(tables["b"]), "--id", "id",
                 "--resamples", "300", "--seed", "2"]) == 0
    out = capsys.readouterr().out
    assert "model B is better" in out and "the data can tell" in out
    out_file = tables["dir"] / "cmp.md"
    assert main(["compare", str(tables["a"]), str(tables["b"]), "--id", "id", "--resamples",
                 "100", "--format", "markdown", "--output", str(out_file)]) == 0
    assert out_file.read_text().startswith("## foldcorr compare")


def test_compare_refuses_ids_that_differ_or_repeat(tables, capsys):
    b = pd.read_csv(tables["b"])
    short = tables["dir"] / "short.csv"
    b.iloc[:-4].to_csv(short, index=False)
    assert main(["compare", str(tables["a"]), str(short), "--id", "id"]) == 2
    err = capsys.readouterr().err
    assert "4 ids of a.csv are not in short.csv" in err and err.count("\n") == 1
    rep = tables["dir"] / "rep.csv"
    pd.concat([b, b.iloc[:2]]).to_csv(rep, index=False)
    assert main(["compare", str(tables["a"]), str(rep), "--id", "id"]) == 2
    assert "repeats 2 ids" in capsys.readouterr().err


def test_compare_usage_errors(tables, capsys):
    assert main(["compare", str(tables["one"]), "--pred-a", "old"]) == 2
    assert "--pred-a COL --pred-b COL" in capsys.readouterr().err
    assert main(["compare", str(tables["a"]), str(tables["b"])]) == 2
    assert "--id COL" in capsys.readouterr().err
    assert main(["compare", str(tables["one"]), "--pred-a", "old", "--pred-b", "nope"]) == 2
    assert "column 'nope' not found" in capsys.readouterr().err
    assert main(["compare", str(tables["one"]), "--pred-a", "old", "--pred-b", "new",
                 "--ci", "0"]) == 2
    assert "`--ci` must be" in capsys.readouterr().err


def test_compare_refuses_truth_that_differs_between_tables(tables, capsys):
    b = pd.read_csv(tables["b"])
    b["actual"] = "diatom"
    bad = tables["dir"] / "bad.csv"
    b.to_csv(bad, index=False)
    assert main(["compare", str(tables["a"]), str(bad), "--id", "id"]) == 2
    assert "disagree on column 'actual'" in capsys.readouterr().err

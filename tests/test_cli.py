"""The command line: formats, exit codes, one-line errors, atomic output."""

import json
import os
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import (
    accuracy_score,
    balanced_accuracy_score,
    cohen_kappa_score,
    f1_score,
    matthews_corrcoef,
)

from foldcorr.cli import main


@pytest.fixture
def table(tmp_path):
    rng = np.random.default_rng(5)
    y = rng.choice(["owl", "wren", "rail", "kite"], 300, p=[0.5, 0.3, 0.15, 0.05])
    p = np.where(rng.random(300) < 0.7, y, rng.choice(["owl", "wren", "rail", "kite"], 300))
    df = pd.DataFrame({"actual": y, "predicted": p, "fold": np.arange(300) % 3})
    path = tmp_path / "calls.csv"
    df.to_csv(path, index=False)
    return path, df


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_json_matches_reference(capsys, table):
    # References: sklearn.metrics on the same samples.
    path, df = table
    code, out, err = run(capsys, "score", path, "--format", "json")
    assert code == 0
    doc = json.loads(out)
    assert doc["schema"] == "foldcorr.score/2"
    y, p = df.actual, df.predicted
    pooled = doc["pooled"]
    assert abs(pooled["rk"] - matthews_corrcoef(y, p)) < 1e-12
    assert abs(pooled["accuracy"] - accuracy_score(y, p)) < 1e-12
    assert abs(pooled["balanced_accuracy"] - balanced_accuracy_score(y, p)) < 1e-12
    assert abs(pooled["kappa"] - cohen_kappa_score(y, p)) < 1e-12
    assert abs(pooled["macro_f1"] - f1_score(y, p, average="macro")) < 1e-12
    assert set(pooled) >= {"macro_mcc", "marginal_mismatch"}
    assert doc["n"] == 300 and doc["classes"] == ["kite", "owl", "rail", "wren"]
    assert [f["fold"] for f in doc["folds"]] == [0, 1, 2]
    for f in doc["folds"]:
        keep = df.fold == f["fold"]
        assert abs(f["rk"] - matthews_corrcoef(y[keep], p[keep])) < 1e-12
        assert f["n"] == keep.sum() and set(f) >= {"accuracy"}
    assert set(doc["fold_summary"]) == {"count", "mean_rk", "sd_rk", "min_rk", "max_rk"}
    assert len(doc["per_class"]) == 4
    row = doc["per_class"][0]
    assert set(row) >= {"class", "support", "predicted", "mcc", "weight", "contribution", "drag",
                        "recall", "precision", "f1", "top_confusion"}
    drags = [r["drag"] for r in doc["per_class"]]
    assert drags == sorted(drags, reverse=True)
    assert isinstance(doc["warnings"], list)


def test_json_without_folds_and_nan_convention(capsys, tmp_path):
    path = tmp_path / "p.csv"
    path.write_text("actual,predicted\na,a\na,a\n")
    code, out, _ = run(capsys, "score", path, "--format", "json", "--undefined", "nan")
    doc = json.loads(out)
    assert code == 0 and doc["folds"] == [] and doc["fold_summary"] is None
    assert doc["pooled"]["rk"] is None and any("R_K is undefined" in w for w in doc["warnings"])
    code, out, _ = run(capsys, "score", path, "--format", "json")
    assert json.loads(out)["pooled"]["rk"] == 0.0


def test_text_report_sections(capsys, table):
    path, _ = table
    code, out, _ = run(capsys, "score", path, "--top", "2")
    assert code == 0
    for heading in ("foldcorr score", "Pooled over all samples", "Folds", "Classes by shortfall share (top 2 of 4)",
                    "2 more classes not shown"):
        assert heading in out
    assert "\x1b[" not in out  # not a terminal: no colour codes


def test_markdown_report(capsys, table):
    path, _ = table
    code, out, _ = run(capsys, "score", path, "--format", "markdown", "--top", "all")
    assert code == 0 and out.startswith("## foldcorr score")
    assert "| class | support |" in out and "|:--|--:|" in out


def test_matrix_input(capsys, tmp_path):
    path = tmp_path / "m.csv"
    path.write_text(",a,b\na,6,2\nb,1,3\n")
    code, out, _ = run(capsys, "score", path, "--matrix", "--format", "json")
    doc = json.loads(out)
    # Reference: sklearn.metrics.matthews_corrcoef on the expanded samples.
    y = ["a"] * 8 + ["b"] * 4
    p = ["a"] * 6 + ["b"] * 2 + ["a"] + ["b"] * 3
    assert abs(doc["pooled"]["rk"] - matthews_corrcoef(y, p)) < 1e-12 and doc["n"] == 12


def test_output_file_is_written_whole(capsys, table, tmp_path):
    path, _ = table
    out_file = tmp_path / "score.json"
    code, out, _ = run(capsys, "score", path, "--format", "json", "--output", out_file)
    assert code == 0 and out == ""
    assert json.loads(out_file.read_text())["schema"] == "foldcorr.score/2"
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


def test_bad_input_leaves_existing_output_alone(capsys, tmp_path):
    out_file = tmp_path / "score.json"
    out_file.write_text("previous")
    bad = tmp_path / "bad.csv"
    bad.write_text("actual,predicted\na,\n")
    code, out, err = run(capsys, "score", bad, "--format", "json", "--output", out_file)
    assert code == 2 and out_file.read_text() == "previous"
    assert err.count("\n") == 1 and "bad.csv: column 'predicted' row 1: missing label" in err


def test_output_into_missing_folder(capsys, table, tmp_path):
    path, _ = table
    code, _, err = run(capsys, "score", path, "--output", tmp_path / "no" / "x.txt")
    assert code == 2 and "folder" in err and err.count("\n") == 1


def test_output_to_a_device_is_written_directly(capsys, table):
    path, _ = table
    code, _, _ = run(capsys, "score", path, "--format", "json", "--output", os.devnull)
    assert code == 0 and os.path.exists(os.devnull)


@pytest.mark.parametrize(
    "argv, message",
    [
        (["score"], "the following arguments are required: PATH"),
        (["score", "x.csv", "--top", "0"], "expected a positive whole number or 'all'"),
        (["score", "x.csv", "--format", "yaml"], "invalid choice: 'yaml'"),
        (["nope"], "invalid choice: 'nope'"),
    ],
)
def test_usage_errors_exit_2(capsys, argv, message):
    code, _, err = run(capsys, *argv)
    assert code == 2 and message in err


def test_unknown_class_option(capsys, table):
    path, _ = table
    code, _, err = run(capsys, "score", path, "--classes", "owl,wren")
    assert code == 2 and "is not among the classes ['owl', 'wren']" in err


def test_demo_runs_and_writes_its_table(capsys, tmp_path):
    code, out, err = run(capsys, "demo", "--out", tmp_path, "--samples", "3000", "--format", "json")
    doc = json.loads(out)
    assert code == 0 and doc["n"] == 3000 and len(doc["classes"]) >= 30
    assert len(doc["folds"]) == 5 and "plankton_predictions.csv" in err
    df = pd.read_csv(tmp_path / "plankton_predictions.csv")
    # Reference: sklearn.metrics.matthews_corrcoef on the written table.
    assert abs(doc["pooled"]["rk"] - matthews_corrcoef(df.actual, df.predicted)) < 1e-12


def test_entry_point_no_traceback_and_no_colour_when_piped(tmp_path, table):
    path, _ = table
    env = {**os.environ, "NO_COLOR": "1"}
    good = subprocess.run([sys.executable, "-m", "foldcorr", "score", str(path)],
                          capture_output=True, text=True, env=env)
    assert good.returncode == 0 and "\x1b[" not in good.stdout
    bad = subprocess.run([sys.executable, "-m", "foldcorr", "score", str(tmp_path / "missing.csv")],
                         capture_output=True, text=True, env=env)
    assert bad.returncode == 2 and "Traceback" not in bad.stderr
    assert bad.stderr.strip() == "foldcorr: error: missing.csv: file not found"

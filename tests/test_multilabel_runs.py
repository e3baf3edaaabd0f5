"""Multilabel runs get what multiclass runs get: save, show, gate, plots and HTML.

Per-label MCC is checked against ``sklearn.metrics.matthews_corrcoef`` on each label's indicator
column (the reference library); the rest checks that the saved, shown and gated runs agree with
the run that made them.
"""

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import matthews_corrcoef

import foldcorr
from foldcorr.cli import main

LABELS = ("gull", "tern", "auk")


@pytest.fixture
def tags(tmp_path):
    """An invented field-recording tagger: three bird calls, four folds."""
    rng = np.random.default_rng(5)
    n = 300
    frame = pd.DataFrame({"clip": [f"c{i:04d}" for i in range(n)], "fold": rng.integers(0, 4, n)})
    for label, rate in zip(LABELS, (0.3, 0.2, 0.08)):
        truth = rng.random(n) < rate
        frame[f"y_{label}"] = truth.astype(int)
        frame[f"p_{label}"] = np.where(rng.random(n) < 0.85, truth, ~truth).astype(int)
    path = tmp_path / "tags.csv"
    frame.to_csv(path, index=False)
    return path, frame


PREFIXES = ["--truth-prefix", "y_", "--pred-prefix", "p_"]


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_multilabel_score_saves_and_show_replays_it(tags, tmp_path, capsys):
    path, _ = tags
    saved = tmp_path / "run.nc"
    code, printed, _ = run(capsys, "score", path, *PREFIXES, "--format", "json", "--save", saved)
    assert code == 0 and saved.exists()
    code, shown, _ = run(capsys, "show", saved, "--format", "json")
    assert code == 0
    assert json.loads(shown) == json.loads(printed)
    assert json.loads(shown)["schema"] == "foldcorr.multilabel/2"


def test_multilabel_per_label_mcc_matches_sklearn(tags):
    path, frame = tags
    ev = foldcorr.score(path, truth_prefix="y_", pred_prefix="p_")
    for label in LABELS:
        expected = matthews_corrcoef(frame[f"y_{label}"], frame[f"p_{label}"])  # sklearn
        got = float(ev.per_label["mcc"].sel(label=label))
        assert got == pytest.approx(expected, abs=1e-12)


def test_multilabel_gate_on_a_saved_run_checks_micro_macro_and_label_floors(tags, tmp_path,
                                                                            capsys):
    path, frame = tags
    saved = tmp_path / "run.nc"
    assert run(capsys, "score", path, *PREFIXES, "--save", saved)[0] == 0
    floors = tmp_path / "floors.csv"
    floors.write_text("class,floor\ngull,0.99\ntern,-1\n")
    code, out, err = run(capsys, "gate", saved, "--min-micro-mcc", "0", "--min-macro-mcc", "0",
                         "--class-floors", floors, "--format", "json")
    doc = json.loads(out)
    assert code == 1 and err == ""
    assert [r["rule"] for r in doc["rules"]] == ["min_micro_mcc", "min_macro_mcc",
                                                 "class_floors"]
    assert [r["passed"] for r in doc["rules"]] == [True, True, False]
    gull = matthews_corrcoef(frame["y_gull"], frame["p_gull"])  # sklearn
    assert doc["failing_classes"] == [{"class": "gull", "mcc": pytest.approx(gull),
                                       "floor": 0.99, "in_truth": int(frame["y_gull"].sum()),
                                       "rule": "class_floors"}]


def test_multilabel_gate_reads_a_table_with_the_same_flags(tags, capsys):
    path, _ = tags
    code, out, _ = run(capsys, "gate", path, *PREFIXES, "--min-class-mcc", "-1")
    assert code == 0 and "labels: 3" in out


@pytest.mark.parametrize("rule", ["--min-rk", "--min-fold-rk", "--max-marginal-mismatch"])
def test_multiclass_rules_are_refused_for_multilabel_in_one_line(tags, tmp_path, capsys, rule):
    path, _ = tags
    code, out, err = run(capsys, "gate", path, *PREFIXES, rule, "0.1")
    assert code == 2 and out == "" and err.count("\n") == 1
    assert "does not apply to a multilabel evaluation" in err


def test_micro_mcc_rule_is_refused_for_multiclass(tmp_path, capsys):
    path = tmp_path / "p.csv"
    path.write_text("actual,predicted\na,a\nb,b\nb,a\n")
    code, _, err = run(capsys, "gate", path, "--min-micro-mcc", "0.1")
    assert code == 2 and "does not apply to a multiclass evaluation" in err


def test_multilabel_plots_and_html(tags, tmp_path, capsys):
    pytest.importorskip("matplotlib")
    path, _ = tags
    plots = tmp_path / "plots"
    plots.mkdir()
    page = tmp_path / "page.html"
    code, _, err = run(capsys, "score", path, *PREFIXES, "--plot", plots, "--format", "html",
                       "--output", page)
    assert code == 0 and "plot files written" in err
    assert {p.stem for p in plots.iterdir()} >= {"loss_budget", "folds"}
    html = page.read_text()
    assert all(label in html for label in LABELS) and "<svg" in html


def test_multilabel_run_refuses_class_groups_in_one_line(tags, tmp_path, capsys):
    # groups merge classes; a multilabel run has none to merge, so the option is refused, not ignored
    path, _ = tags
    groups = tmp_path / "groups.csv"
    groups.write_text("class,group\ngull,seabird\ntern,seabird\nauk,seabird\n")
    code, out, err = run(capsys, "score", path, *PREFIXES, "--groups", groups)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and "multilabel" in err and "Traceback" not in err

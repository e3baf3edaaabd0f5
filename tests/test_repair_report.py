"""The repair section in score reports and on the command line."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from foldcorr.analysis import gains as repair_gains
from foldcorr.analysis import repair
from foldcorr.cli import main
from foldcorr.evaluation import evaluate
from foldcorr.report import render_score
from foldcorr.report.json import score_dict
from foldcorr.report.tables import score_report
from foldcorr.report.text import render_text
from foldcorr.tensor import confusion_tensor, tally


def _table(path, n=600, seed=5):
    rng = np.random.default_rng(seed)
    classes = np.array(["alpha", "beta", "gamma", "delta", "a much longer class name"])
    actual = rng.integers(0, 5, n)
    predicted = np.where(rng.random(n) < 0.7, actual, rng.integers(0, 5, n))
    pd.DataFrame({"actual": classes[actual], "predicted": classes[predicted],
                  "fold": rng.integers(1, 4, n)}).to_csv(path, index=False)
    return path


def _ev(top=20):
    t = tally(list("aabbccdd") * 3, list("abbbcadd") * 3, folds=[1, 2, 3] * 8)
    return evaluate(t).with_extra("repair", repair.repair_analysis(t, top=top)), t


def test_json_has_confusions_and_per_class_repair_keys():
    ev, t = _ev(top=2)
    doc = score_dict(ev)
    assert doc["schema"] == "foldcorr.score/2"
    assert [set(c) for c in doc["confusions"]] == [{"actual", "predicted", "count", "gain"}] * 2
    ra = ev.extras["repair"]
    for entry in doc["per_class"]:
        label = entry["class"]
        for key in ("gain_fix_fn", "gain_fix_fp", "gain_fix_both", "leave_out_delta"):
            assert entry[key] == pytest.approx(float(ra.per_class[key].sel({"class": label})))
        assert "top5_folds" not in entry  # replaced by per_class_fold (issue 17)
    # the costliest confusion of the document is the largest pair gain of the pooled tensor
    gains = repair_gains.pair_gains(t.sum("fold"))
    best = doc["confusions"][0]
    assert best["gain"] == pytest.approx(float(gains.max()))
    assert best["gain"] == pytest.approx(float(gains.sel(actual=best["actual"],
                                                         predicted=best["predicted"])))


def test_json_without_folds_has_null_fold_figures():
    t = confusion_tensor([[5, 1], [2, 6]], ["a", "b"])
    doc = score_dict(evaluate(t).with_extra("repair", repair.repair_analysis(t)))
    assert doc["per_class"][0]["drag_fold_sd"] is None
    json.dumps(doc, allow_nan=False)


def test_nan_convention_gives_null_not_nan_in_json():
    t = confusion_tensor([[0, 3], [2, 0]], ["a", "b"])
    ra = repair.repair_analysis(t, undefined="nan")
    doc = score_dict(evaluate(t, undefined="nan").with_extra("repair", ra))
    assert all(c["gain"] is None for c in doc["confusions"])
    assert any("after moving" in w for w in doc["warnings"])
    json.dumps(doc, allow_nan=False)


def test_text_and_markdown_show_the_section_and_the_gain_columns():
    ev, _ = _ev()
    report = score_report(ev, top=1)
    titles = [t.title for t in report.tables]
    assert "Costliest confusions (top 1 by repair gain)" in titles
    classes = next(t for t in report.tables if t.title.startswith("Classes by shortfall share"))
    assert [c.title for c in classes.columns][-6:] == [
        "fix FN", "fix FP", "fix both", "w/o class", "fold ranks", "most often taken for"]
    md = render_score(ev, "markdown", top=3)
    assert "### Costliest confusions" in md and "| fix both |" in md


def test_wide_class_table_drops_columns_by_priority_instead_of_continuing():
    # Issue 14: a narrow terminal loses the least important columns, named in a note; no
    # "(continued)" table repeats the first column.
    ev, _ = _ev()
    text = render_text(score_report(ev), width=100)
    assert max(len(line) for line in text.splitlines()) <= 100
    assert "(continued)" not in text and "not shown at this width: " in text
    dropped = text.split("not shown at this width: ")[1].split(" (all are in JSON)")[0]
    assert "w/o class" in dropped and "MCC" not in dropped.split(", ")
    header = next(line for line in text.splitlines() if line.startswith("class "))
    for title in ("MCC", "drag", "shortfall share"):
        assert title in header
    wide = render_text(score_report(ev), width=250)
    assert "(continued)" not in wide and "not shown at this width" not in wide
    for title in ("precision", "fix both", "w/o class", "fold ranks", "most often taken for"):
        assert title in wide


def test_cli_score_json_carries_every_confusion_whatever_top(tmp_path, capsys):
    # --top limits the rows shown in text, Markdown and HTML; JSON lists every confusion.
    path = _table(tmp_path / "p.csv")
    assert main(["score", str(path), "--format", "json", "--top", "3"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert len(doc["confusions"]) == 20 and doc["repair"]["confusions_top"] is None
    assert {"gain_fix_fn", "gain_fix_fp", "gain_fix_both", "leave_out_delta",
            "drag_fold_sd"} <= set(doc["per_class"][0])
    assert {"class", "rank_best", "rank_worst", "moves", "folds"} == set(doc["per_class_fold"][0])
    assert main(["score", str(path), "--format", "json", "--top", "all"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert len(doc["confusions"]) == 20  # every non-empty off-diagonal cell of 5 classes


def test_cli_text_has_costliest_confusions(tmp_path, capsys):
    path = _table(tmp_path / "p.csv")
    assert main(["score", str(path), "--top", "4"]) == 0
    out = capsys.readouterr().out
    assert "Costliest confusions (top 4 by repair gain)" in out


def test_cli_plot_without_matplotlib_is_one_line_and_exit_2(tmp_path, capsys, monkeypatch):
    import foldcorr.errors as errors

    real = errors.importlib.util.find_spec
    monkeypatch.setattr(errors.importlib.util, "find_spec",
                        lambda name, *a: None if name == "matplotlib" else real(name, *a))
    path = _table(tmp_path / "p.csv")
    out_file = tmp_path / "report.json"
    code = main(["score", str(path), "--plot", str(tmp_path / "plots"), "--format", "json",
                 "--output", str(out_file)])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2
    assert err == ["foldcorr: error: drawing plots needs the package 'matplotlib'; install it "
                   "with pip install 'foldcorr[plot]'"]
    assert not out_file.exists()

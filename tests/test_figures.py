"""The figure registry: one list of figures behind the evaluation and every report format."""

import json
import warnings

import numpy as np
import pandas as pd
import pytest
import xarray as xr
from sklearn.metrics import f1_score, matthews_corrcoef

from foldcorr import metrics as m
from foldcorr.analysis.multilabel import multilabel_intervals
from foldcorr.tensor import multilabel_tally
from foldcorr.cli import main
from foldcorr.errors import InvalidTensorError, UndefinedMetricWarning
from foldcorr.evaluation import evaluate
from foldcorr.figures import (
    FIGURES,
    KINDS,
    MULTICLASS,
    MULTILABEL,
    PER_FOLD,
    POOLED,
    SCOPES,
    STYLES,
    figures_of,
)
from foldcorr.report import render_score
from foldcorr.report.json import score_dict
from foldcorr.report.tables import score_report
from foldcorr.tensor import LABEL, tally


def _multiclass():
    rng = np.random.default_rng(5)
    y = rng.choice(["owl", "wren", "rail", "kite"], 300, p=[0.5, 0.3, 0.15, 0.05])
    p = np.where(rng.random(300) < 0.7, y, rng.choice(["owl", "wren", "rail", "kite"], 300))
    return evaluate(tally(y, p, folds=np.arange(300) % 3))


def _multilabel():
    rng = np.random.default_rng(3)
    truth = rng.random((300, 4)) < [0.3, 0.1, 0.05, 0.5]
    pred = truth ^ (rng.random((300, 4)) < 0.15)
    return evaluate(multilabel_tally(truth, pred, labels=["gull", "tern", "auk", "wren"],
                                     folds=np.arange(300) % 3))


EVALUATIONS = {MULTICLASS: _multiclass, MULTILABEL: _multilabel}


def test_every_entry_is_well_formed_and_keys_are_unique_per_kind_and_scope():
    for f in FIGURES:
        assert f.scope in SCOPES and f.style in STYLES and set(f.kinds) <= set(KINDS)
    for kind in KINDS:
        for scope in SCOPES:
            keys = [f.key for f in figures_of(kind, scope)]
            assert len(keys) == len(set(keys)), (kind, scope)


def test_summary_figures_of_the_shift_analysis_are_the_registry_pooled_metrics():
    own = [f.key for f in figures_of(MULTICLASS, POOLED) if f.part is None and f.style != "count"]
    assert own == list(m.SUMMARY_FIGURES)
    assert all(m.SUMMARY_FIGURES[f.key] is f.compute for f in figures_of(MULTICLASS, POOLED)
               if f.key in m.SUMMARY_FIGURES)


@pytest.mark.parametrize("kind", KINDS)
def test_evaluation_holds_every_registry_figure_of_its_kind(kind):
    ev = EVALUATIONS[kind]()
    assert ev.kind == kind
    for scope, table in ((POOLED, ev.pooled), (PER_FOLD, ev.folds), (ev.row_scope, ev.rows)):
        assert {f.key for f in ev.figures(scope)} <= set(table.data_vars)


def _text_titles(report):
    """Row titles of the pooled table and column titles of every other core table."""
    pooled, folds, rows = report.tables[:3]
    return ({row[0] for row in pooled.rows}, {c.title for c in folds.columns[1:]},
            {c.title for c in rows.columns[1:]})


@pytest.mark.parametrize("kind", KINDS)
def test_text_and_json_show_the_same_figures(kind):
    ev = EVALUATIONS[kind]()
    doc = score_dict(ev)
    pooled_text, fold_text, row_text = _text_titles(score_report(ev, top=2))
    shown = [f for f in ev.figures(POOLED) if f.style != "count"]
    assert pooled_text == {f.label for f in shown}
    pooled_json = doc["pooled"] if kind == MULTICLASS else doc
    assert {f.key for f in shown} <= set(pooled_json)
    assert fold_text == {f.label for f in ev.figures(PER_FOLD)}
    row_figures = ev.figures(ev.row_scope)
    assert row_text == {f.label for f in row_figures}
    rows_json = doc["per_class" if kind == MULTICLASS else "per_label"]
    assert set(rows_json[0]) == {ev.row_scope, *(f.key for f in row_figures)}


@pytest.mark.parametrize("kind", KINDS)
def test_json_fold_rows_carry_every_figure_of_the_text_fold_table(kind):
    ev = EVALUATIONS[kind]()
    folds = score_report(ev).tables[1]
    by_label = {f.label: f.key for f in ev.figures(PER_FOLD)}
    expected = {"fold", *(by_label[c.title] for c in folds.columns[1:])}
    for row in score_dict(ev)["folds"]:
        assert set(row) == expected


def test_new_per_class_f1_matches_reference_and_shows_in_text():
    # Reference: sklearn.metrics.f1_score(average=None) on the samples.
    y = ["a", "a", "b", "b", "c", "c", "c"]
    p = ["a", "b", "b", "b", "c", "a", "c"]
    ev = evaluate(tally(y, p))
    np.testing.assert_allclose(ev.per_class["f1"].values, f1_score(y, p, average=None),
                               atol=1e-12)
    assert "F1" in render_score(ev, "text")


def test_per_label_f1_matches_reference_in_every_format():
    # Reference: sklearn.metrics.f1_score(average=None) on the indicator matrices.
    rng = np.random.default_rng(8)
    truth = rng.random((150, 3)) < [0.4, 0.2, 0.0]
    pred = truth ^ (rng.random((150, 3)) < 0.2)
    pred[:, 2] = False  # label "c": no positive anywhere, F1 is 0/0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        ev = evaluate(multilabel_tally(truth, pred, labels=["a", "b", "c"]), undefined="nan")
    ref = f1_score(truth, pred, average=None, zero_division=np.nan)
    np.testing.assert_allclose(ev.per_label["f1"].sel(label=["a", "b", "c"]).values, ref,
                               atol=1e-12)
    assert any("F1 is undefined (0/0) for label 'c'" in w for w in ev.warnings)
    assert "F1" in render_score(ev, "text")
    assert {row["label"]: row["f1"] for row in score_dict(ev)["per_label"]}["c"] is None


@pytest.fixture
def table(tmp_path):
    rng = np.random.default_rng(7)
    classes = [f"c{i}" for i in range(8)]
    y = rng.choice(classes, 600)
    p = np.where(rng.random(600) < 0.6, y, rng.choice(classes, 600))
    path = tmp_path / "calls.csv"
    pd.DataFrame({"actual": y, "predicted": p, "fold": np.arange(600) % 4}).to_csv(path,
                                                                               index=False)
    return path


def _score_json(capsys, *argv):
    assert main(["score", *map(str, argv), "--format", "json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_top_limits_rows_shown_never_json(capsys, table):
    # --top is "rows shown": JSON carries every class, confusion and fold whatever it says.
    three = _score_json(capsys, table, "--top", "3")
    every = _score_json(capsys, table, "--top", "all")
    assert three == every
    assert len(three["confusions"]) > 3 and len(three["per_class"]) == 8
    assert len(three["folds"]) == 4
    assert main(["score", str(table), "--top", "3", "--format", "markdown"]) == 0
    markdown = capsys.readouterr().out
    assert "Costliest confusions (top 3 by repair gain)" in markdown
    # Markdown shows the top rows and every class in a collapsible block (issue 14).
    assert "(top 3 of 8)" in markdown and "<details><summary>All 8 rows</summary>" in markdown


def test_top_limits_multilabel_rows_shown_never_json(capsys, tmp_path):
    rng = np.random.default_rng(2)
    truth = rng.random((200, 5)) < 0.3
    pred = truth ^ (rng.random((200, 5)) < 0.2)
    path = tmp_path / "tags.csv"
    pd.DataFrame({**{f"y_{i}": truth[:, i].astype(int) for i in range(5)},
                  **{f"p_{i}": pred[:, i].astype(int) for i in range(5)}}).to_csv(path,
                                                                                 index=False)
    flags = ("--truth-prefix", "y_", "--pred-prefix", "p_")
    three = _score_json(capsys, path, *flags, "--top", "3")
    assert three == _score_json(capsys, path, *flags, "--top", "all")
    assert len(three["per_label"]) == 5


def test_multilabel_tensor_is_recognised_and_matches_reference():
    # Reference: sklearn.metrics.matthews_corrcoef on the flattened indicators (micro).
    rng = np.random.default_rng(4)
    truth = rng.random((100, 3)) < 0.4
    pred = truth ^ (rng.random((100, 3)) < 0.2)
    ev = evaluate(multilabel_tally(truth, pred))
    assert ev.kind == MULTILABEL and ev.per_class is None and ev.fold_summary is None
    assert ev.micro_mcc == pytest.approx(matthews_corrcoef(truth.ravel(), pred.ravel()),
                                         abs=1e-12)


def test_a_label_dim_needs_binary_class_coordinates():
    classes = ["a", "b", "c"]
    t = xr.DataArray(np.ones((2, 3, 3), int), dims=(LABEL, "actual", "predicted"), name="count",
                     coords={LABEL: ["x", "y"], "actual": classes, "predicted": classes})
    with pytest.raises(InvalidTensorError, match=r"class coordinates \[False, True\]"):
        evaluate(t)


def test_multilabel_renders_in_every_format_from_the_one_report_path():
    ev = _multilabel()
    t = ev.tensor
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        ev = ev.with_extra("intervals", multilabel_intervals(t, n_resamples=100, seed=1))
    html = render_score(ev, "html")
    assert "Labels by cost" in html and "MCC interval" in html
    assert render_score(ev, "markdown").startswith("## foldcorr score (multilabel)")
    doc = json.loads(render_score(ev, "json"))
    assert doc["schema"] == "foldcorr.multilabel/2" and "micro_mcc_ci" in doc
    assert all(len(row["mcc_ci"]) == 2 for row in doc["per_label"])


def test_docs_json_lists_every_registry_key():
    import pathlib

    text = (pathlib.Path(__file__).parents[1] / "docs" / "json.md").read_text()
    missing = {f.key for f in FIGURES if f"`{f.key}`" not in text}
    assert missing == set()

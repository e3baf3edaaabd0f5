"""Plots: each draws on a given Axes, draws the result's own figures, shows itself inline.

The values drawn are compared with scikit-learn's metrics (``matthews_corrcoef``,
``confusion_matrix``) on the same labels, or with the evaluation's figures, which the
rest of the suite ties to scikit-learn.
"""

from __future__ import annotations

import struct
import subprocess
import sys
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from sklearn.metrics import confusion_matrix, matthews_corrcoef

from foldcorr.cli import main
from foldcorr.errors import InvalidTensorError, OptionError
from foldcorr.evaluation import evaluate
from foldcorr.tensor import confusion_tensor, joint_tally, multilabel_tally, tally

pytest.importorskip("matplotlib")

from matplotlib.figure import Figure  # noqa: E402

from foldcorr.report import plots  # noqa: E402  (needs matplotlib only when drawing)


def png_size(data: bytes) -> tuple[int, int]:
    """Width and height from a PNG's IHDR chunk (PNG specification, W3C 2003, section 11.2.2)."""
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


def labels(k=8, n=1200, seed=2):
    rng = np.random.default_rng(seed)
    y = rng.integers(0, k, n)
    p = np.where(rng.random(n) < 0.7, y, rng.integers(0, k, n))
    p[(y == 3) & (rng.random(n) < 0.7)] = 1  # one class mostly taken for another
    return y, p, np.arange(n) % 4


@pytest.fixture(scope="module")
def case():
    y, p, f = labels()
    return y, p, f, evaluate(tally(y, p, folds=f))


def _axes():
    fig = Figure()
    return fig.add_subplot()


matrices = st.integers(1, 7).flatmap(
    lambda k: st.lists(st.integers(0, 9), min_size=k * k, max_size=k * k).map(
        lambda v: np.array(v).reshape(k, k)))


# --- every plot on a given Axes, and as a figure of its own -------------------------------


def _results(case):
    from foldcorr.analysis.compare import compare_models
    from foldcorr.analysis.many import compare_many
    from foldcorr.analysis.thresholds import sweep

    y, p, f, ev = case
    rng = np.random.default_rng(5)
    q = np.where(rng.random(y.size) < 0.8, y, rng.integers(0, 8, y.size))
    many = compare_many(y, {"a": p, "b": q, "c": y[::-1]}, folds=f, n_resamples=200, seed=1)
    two = compare_models(joint_tally(y, p, q, folds=f), n_resamples=200, seed=1)
    sw = sweep(y == 1, rng.random(y.size) + (y == 1), folds=f, at=0.9)
    return {"Evaluation": ev, "ManyComparison": many, "Comparison": two, "SweepResult": sw}


def test_every_plot_draws_on_the_given_axes_and_returns_it(case):
    results = _results(case)
    for name, kinds in plots.PLOTS.items():
        for kind in kinds:
            ax = _axes()
            assert results[name].plot(kind, ax=ax) is ax, (name, kind)
            assert (ax.get_title() or ax.get_title("left")) and (ax.lines or ax.images or ax.collections), (name, kind)
            fig = results[name].plot(kind)
            assert isinstance(fig, Figure) and fig.axes, (name, kind)


def test_an_unknown_kind_is_refused(case):
    with pytest.raises(OptionError, match="`kind` 'pie' is not a plot of Evaluation; choose"):
        case[3].plot("pie")


# --- the values drawn -----------------------------------------------------------------------


@settings(max_examples=60, deadline=None)
@given(matrices, st.integers(1, 8))
def test_loss_budget_shares_add_up_to_one_minus_rk(cells, shown):
    assume(cells.sum() > 0)  # with no sample at all there is no class to carry a share
    ev = evaluate(confusion_tensor(cells, list(range(len(cells)))))
    data = plots.loss_budget_data(ev, max_classes=shown)
    # 1 - R_K = sum over classes of (drag + mismatch share): the exact split of
    # docs/decomposition.md; every part is non-negative (Cauchy-Schwarz)
    assert sum(data["share"]) + data["rest_share"] == pytest.approx(1.0 - ev.rk, abs=1e-12)
    assert min(data["drag"] + data["mismatch"], default=0.0) >= -1e-12
    assert len(data["labels"]) == min(shown, len(cells))


def test_loss_budget_draws_the_evaluations_shares_with_r_k_from_sklearn(case):
    y, p, _, ev = case
    ax = plots.loss_budget_plot(ev, ax=_axes(), max_classes=5)
    drag_dots, share_marks = ax.lines[0], ax.lines[1]
    ranked = ev.ranked()
    np.testing.assert_allclose(drag_dots.get_xdata(), ranked["drag"].values[:5])
    np.testing.assert_allclose(share_marks.get_xdata(), ranked["shortfall_share"].values[:5])
    # R_K of the whole table is sklearn's multiclass MCC (Gorodkin 2004 = sklearn's formula)
    assert plots.loss_budget_data(ev)["shortfall"] == pytest.approx(1 - matthews_corrcoef(y, p))
    assert "1 − R_K" in ax.get_title()


def test_multilabel_loss_budget_adds_up_to_one_minus_macro_mcc():
    rng = np.random.default_rng(1)
    truth = rng.random((300, 3)) < 0.4
    pred = np.where(rng.random((300, 3)) < 0.8, truth, ~truth)
    ev = evaluate(multilabel_tally(truth, pred, labels=["x", "y", "z"]))
    data = plots.loss_budget_data(ev)
    macro = np.mean([matthews_corrcoef(truth[:, j], pred[:, j]) for j in range(3)])
    assert sum(data["share"]) == pytest.approx(1 - macro)  # sklearn, label by label
    assert data["mismatch"] == [0.0, 0.0, 0.0]


def test_confusion_heatmap_draws_sklearns_matrix(case):
    y, p, _, ev = case
    data = plots.confusion_data(ev)
    order = data["labels"]
    reference = confusion_matrix(y, p, labels=order)  # sklearn, in the plot's order
    np.testing.assert_array_equal(data["counts"], reference)
    off = reference.astype(float)
    np.fill_diagonal(off, np.nan)
    np.testing.assert_allclose(data["error_share"], off / np.nansum(off))
    np.testing.assert_allclose(data["recall"], np.diag(reference) / reference.sum(axis=1))
    ax = plots.confusion_plot(ev, ax=_axes())
    np.testing.assert_allclose(ax.images[0].get_array().filled(np.nan), data["error_share"])


@settings(max_examples=40, deadline=None)
@given(st.integers(3, 30), st.integers(2, 12), st.integers(0, 2**16))
def test_grouping_keeps_every_count(k, limit, seed):
    rng = np.random.default_rng(seed)
    ev = evaluate(confusion_tensor(rng.integers(0, 5, (k, k)), [f"c{i}" for i in range(k)]))
    data = plots.confusion_data(ev, max_classes=limit)
    assert data["counts"].sum() == ev.tensor.values.sum()  # the grouped total is the tensor's
    assert len(data["labels"]) == min(k, limit)
    if k > limit:
        assert data["labels"][-1] == f"remainder ({k - limit + 1} classes)"
        assert data["merged"] == k - limit + 1


def test_beyond_100_classes_the_heatmap_groups_and_says_so():
    rng = np.random.default_rng(4)
    k = 130
    y = rng.integers(0, k, 20000)
    p = np.where(rng.random(20000) < 0.7, y, (y + rng.integers(1, 3, 20000)) % k)
    p[y == 5] = 6  # class 5 carries much confusion: it must keep its own row
    ev = evaluate(tally(y, p))
    data = plots.confusion_data(ev)
    assert len(data["labels"]) == 100 and data["merged"] == 31
    assert 5 in data["labels"] and 6 in data["labels"]
    assert data["counts"].sum() == 20000
    ax = plots.confusion_plot(ev, ax=_axes())
    assert "31 classes carrying the least confusion are merged" in ax.get_title("left")
    assert ax.get_yticklabels()[-1].get_text() == "remainder (31 classes)"


def test_class_fold_cells_are_sklearns_per_fold_mcc(case):
    y, p, f, ev = case
    data = plots.class_fold_data(ev, max_classes=5)
    assert data["classes"] == ev.ranked().coords["class"].values[:5].tolist()
    for i, c in enumerate(data["classes"]):
        for j, fold in enumerate(data["folds"]):
            inside = f == fold
            expected = matthews_corrcoef(y[inside] == c, p[inside] == c)  # one-vs-rest, sklearn
            assert data["values"][i, j] == pytest.approx(expected)
    ax = plots.class_fold_plot(ev, ax=_axes(), max_classes=5)
    np.testing.assert_allclose(ax.images[0].get_array(), data["values"])
    with pytest.raises(InvalidTensorError, match="needs a multiclass evaluation with folds"):
        plots.class_fold_data(evaluate(tally(y, p)))


def test_fold_plot_draws_each_folds_r_k_from_sklearn(case):
    y, p, f, ev = case
    ax = plots.fold_plot(ev, ax=_axes())
    expected = [matthews_corrcoef(y[f == k], p[f == k]) for k in range(4)]
    np.testing.assert_allclose(ax.lines[0].get_ydata(), expected)
    with pytest.raises(InvalidTensorError, match="needs folds"):
        plots.fold_data(evaluate(tally(y, p)))


def test_models_plot_draws_each_models_r_k_and_its_interval(case):
    results = _results(case)
    many = results["ManyComparison"]
    y, p, f, _ = case
    data = plots.models_data(many)
    assert data["models"][0] == many.best
    predictions = {"a": p, "c": y[::-1]}
    for name, rk in zip(data["models"], data["rk"]):
        if name in predictions:
            assert rk == pytest.approx(matthews_corrcoef(y, predictions[name]))  # sklearn
    assert (data["low"] <= data["rk"]).all() and (data["rk"] <= data["high"]).all()
    ax = plots.models_plot(many, ax=_axes())
    dots = np.concatenate([ax.lines[0].get_xdata(), ax.lines[1].get_xdata()])
    np.testing.assert_allclose(np.sort(dots), np.sort(data["rk"]))


def test_difference_plot_draws_b_minus_a(case):
    two = _results(case)["Comparison"]
    data = plots.difference_data(two)
    assert data["difference"][0] == pytest.approx(two.rk_b - two.rk_a)
    assert data["low"][0] == two.ci[0] and data["high"][0] == two.ci[1]


def test_threshold_plot_fold_curves_are_sklearns_mcc_per_fold():
    from foldcorr.analysis.thresholds import sweep

    rng = np.random.default_rng(7)
    truth = rng.random(400) < 0.4
    score = np.round(rng.random(400) * 0.6 + truth * 0.3, 2)  # ties on purpose
    folds = np.arange(400) % 3
    r = sweep(truth, score, folds=folds)
    data = plots.threshold_data(r)
    curves = data["fold_curves"]
    for j in range(3):
        for t in curves["threshold"].values[::7]:
            inside = folds == j
            expected = matthews_corrcoef(truth[inside], score[inside] >= t)  # sklearn
            assert curves.sel(fold=j, threshold=t).item() == pytest.approx(expected, abs=1e-12)
    for (t, m), j in zip(data["chosen"], range(3)):  # each choice sits on its fold's curve
        assert m == pytest.approx(matthews_corrcoef(truth[folds == j], score[folds == j] >= t))
    ax = plots.threshold_plot(r, ax=_axes())
    assert not any(line.get_label() in ("precision", "recall") for line in ax.lines)
    ax = plots.threshold_plot(r, ax=_axes(), companions=["recall"])
    assert [line.get_label() for line in ax.lines][0] == "recall"
    with pytest.raises(OptionError, match="`companions` 'auc'"):
        plots.threshold_data(r, companions=["auc"])


# --- inline display, files ------------------------------------------------------------------


def test_a_figure_shows_itself_as_png_and_svg(case):
    fig = case[3].plot("loss_budget")
    png = fig._repr_png_()
    w, h = fig.get_size_inches() * plots.DPI
    assert png_size(png) == (round(w), round(h))
    assert ET.fromstring(fig._repr_svg_().encode()).tag.endswith("svg")


def test_inline_display_in_a_fresh_process_never_touches_pyplot():
    code = ("import sys\n"
            "from foldcorr.tensor import tally\n"
            "from foldcorr.evaluation import evaluate\n"
            "ev = evaluate(tally(list('aabbcc'), list('abbbca')))\n"
            "png = ev.plot('confusion')._repr_png_()\n"
            "assert png[:4] == b'\\x89PNG', png[:8]\n"
            "print('matplotlib.pyplot' in sys.modules)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "False"


def test_the_notebook_display_formatter_gives_png(case):
    formatters = pytest.importorskip("IPython.core.formatters")
    data, _ = formatters.DisplayFormatter().format(case[3].plot("folds"))
    assert data["image/png"][:4] == b"\x89PNG"


def test_save_plots_writes_every_plot_of_an_evaluation(tmp_path, case):
    ev = case[3]
    written = plots.save_plots(ev, tmp_path / "out")
    names = ("loss_budget", "confusion", "folds", "class_fold")
    assert sorted(p.name for p in written) == sorted(f"{n}.{f}" for n in names
                                                     for f in ("png", "svg"))
    for path in written:
        if path.suffix == ".svg":
            assert ET.parse(path).getroot().tag.endswith("svg")
        else:
            assert png_size(path.read_bytes())[0] > 300
    assert not [p for p in (tmp_path / "out").iterdir() if p.name.startswith(".")]
    no_folds = evaluate(tally(case[0], case[1]))
    assert [p.name for p in plots.save_plots(no_folds, tmp_path / "b", formats=("png",))] == [
        "loss_budget.png", "confusion.png"]


def test_cli_plot_option_writes_the_files(tmp_path, capsys):
    import pandas as pd

    path = tmp_path / "predictions.csv"
    pd.DataFrame({"actual": list("aabbccdd") * 10, "predicted": list("abbbcadd") * 10,
                  "fold": [1, 2] * 40}).to_csv(path, index=False)
    assert main(["score", str(path), "--plot", str(tmp_path / "figs"), "--format", "json"]) == 0
    captured = capsys.readouterr()
    assert "8 plot files written" in captured.err
    assert sorted(p.stem for p in (tmp_path / "figs").glob("*.png")) == [
        "class_fold", "confusion", "folds", "loss_budget"]


def test_svg_text_is_the_same_on_every_run(case):
    first = plots.figure_svg(plots.loss_budget_plot(case[3]))
    assert first == plots.figure_svg(plots.loss_budget_plot(case[3]))


def test_cli_compare_plot_option_writes_the_models_plot(tmp_path, capsys):
    import pandas as pd

    y, p, f = labels(k=4, n=300)
    rng = np.random.default_rng(9)
    path = tmp_path / "models.csv"
    pd.DataFrame({"actual": y, "m1": p, "m2": np.where(rng.random(300) < 0.6, y, p),
                  "m3": y[::-1], "fold": f}).to_csv(path, index=False)
    args = ["compare", str(path), "--truth", "actual", "--fold", "fold", "--resamples", "200",
            "--seed", "1", "--format", "json", "--plot"]
    assert main([*args, str(tmp_path / "many"), "--models", "m1,m2,m3"]) == 0
    assert sorted(p.name for p in (tmp_path / "many").iterdir()) == ["models.png", "models.svg"]
    assert main([*args, str(tmp_path / "two"), "--models", "m1,m2"]) == 0
    assert sorted(p.name for p in (tmp_path / "two").iterdir()) == [
        "difference.png", "difference.svg"]
    assert "2 plot files written" in capsys.readouterr().err


def test_without_matplotlib_a_plot_is_one_clear_error(case, monkeypatch):
    import importlib.util

    from foldcorr.errors import MissingDependencyError

    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: None if name == "matplotlib" else real(name, *a))
    with pytest.raises(MissingDependencyError, match="drawing plots needs the package "
                                                     "'matplotlib'.*plot"):
        case[3].plot("loss_budget")

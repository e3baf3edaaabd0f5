"""Plots: the numbers behind each figure, and the files written."""

from __future__ import annotations

import struct
import xml.etree.ElementTree as ET
from dataclasses import dataclass

import numpy as np
import pytest
import xarray as xr
from hypothesis import given, settings
from hypothesis import strategies as st

from foldcorr.cli import main
from foldcorr.errors import InvalidTensorError
from foldcorr.evaluation import evaluate
from foldcorr.tensor import confusion_tensor

pytest.importorskip("matplotlib")

from foldcorr.report import plots  # noqa: E402  (needs matplotlib only when drawing)


def png_size(path) -> tuple[int, int]:
    """Width and height from a PNG's IHDR chunk (PNG specification, W3C 2003, section 11.2.2)."""
    head = path.read_bytes()[:24]
    assert head[:8] == b"\x89PNG\r\n\x1a\n" and head[12:16] == b"IHDR"
    return struct.unpack(">II", head[16:24])


def _ev(folds=True, k=6, seed=2):
    rng = np.random.default_rng(seed)
    cells = rng.integers(0, 6, (3, k, k)) + np.eye(k, dtype=int) * rng.integers(5, 30, k)
    if not folds:
        return evaluate(confusion_tensor(cells.sum(0), [f"class {i}" for i in range(k)]))
    return evaluate(confusion_tensor(cells, [f"class {i}" for i in range(k)],
                                     leading={"fold": ["A", "B", "C"]}))


matrices = st.integers(1, 7).flatmap(
    lambda k: st.lists(st.integers(0, 9), min_size=k * k, max_size=k * k).map(
        lambda v: np.array(v).reshape(k, k)))


@settings(max_examples=60, deadline=None)
@given(matrices, st.integers(1, 8))
def test_loss_budget_bars_sum_to_one_minus_rk(cells, shown):
    ev = evaluate(confusion_tensor(cells, list(range(len(cells)))))
    data = plots.loss_budget_data(ev, max_classes=shown)
    # 1 - R_K = sum of drags + marginal mismatch (the exact decomposition; Cauchy-Schwarz
    # makes the mismatch non-negative), so the bars end at R_K
    assert sum(data["sizes"]) == pytest.approx(1.0 - data["rk"], abs=1e-12)
    assert all(s >= -1e-12 for s in data["sizes"])
    assert data["starts"][0] == 1.0
    assert data["starts"][-1] - data["sizes"][-1] == pytest.approx(data["rk"], abs=1e-12)
    assert sum(kind == "class" for kind in data["kinds"]) <= shown


def test_loss_budget_lists_classes_by_drag_and_groups_the_rest():
    ev = _ev(k=12)
    data = plots.loss_budget_data(ev, max_classes=4)
    by_drag = ev.by_drag()
    assert data["labels"][1:5] == by_drag.coords["class"].values[:4].tolist()
    np.testing.assert_allclose(data["sizes"][1:5], by_drag.drag.values[:4])
    assert data["labels"][-1] == "other (8 classes)"
    assert data["sizes"][-1] == pytest.approx(float(by_drag.drag.values[4:].sum()))


def test_confusion_data_rows_are_shares_and_other_keeps_every_count():
    ev = _ev(k=9)
    full = plots.confusion_data(ev)
    np.testing.assert_allclose(full["shares"].sum(axis=1), 1.0)
    assert full["labels"] == ev.by_drag().coords["class"].values.tolist()
    small = plots.confusion_data(ev, max_classes=4)
    assert small["labels"][-1] == "other (6)" and small["merged"] == 6
    assert small["counts"].sum() == ev.tensor.values.sum()
    np.testing.assert_array_equal(small["counts"][:3, :3], full["counts"][:3, :3])


def test_fold_data_and_intervals_from_an_uncertainty_section():
    ev = _ev()
    assert plots.fold_data(ev)["low"] is None
    np.testing.assert_allclose(plots.fold_data(ev)["rk"], ev.folds.rk.values)

    @dataclass(frozen=True)
    class Intervals:
        fold_intervals: xr.Dataset

    rk = ev.folds.rk
    section = Intervals(xr.Dataset({"low": rk - 0.05, "high": rk + 0.04}))
    data = plots.fold_data(ev.with_extra("uncertainty", section))
    np.testing.assert_allclose(data["low"], rk.values - 0.05)
    fig = plots.fold_figure(ev.with_extra("uncertainty", section))
    assert len(fig.axes[0].containers) == 1  # the error bars
    # an uncertainty section of another shape is ignored, not an error
    assert plots.fold_data(ev.with_extra("uncertainty", object()))["low"] is None
    with pytest.raises(InvalidTensorError, match="needs folds"):
        plots.fold_data(_ev(folds=False))


def test_figures_have_titles_labels_and_legends():
    figs = plots.figures(_ev())
    assert sorted(figs) == ["confusion", "folds", "loss_budget"]
    for name, fig in figs.items():
        ax = fig.axes[0]
        assert ax.get_title() and ax.get_xlabel(), name
    assert figs["loss_budget"].axes[0].get_legend() is not None
    assert figs["folds"].axes[0].get_legend() is not None
    assert len(figs["confusion"].axes) == 2  # the heatmap and its colour bar


def test_save_plots_writes_png_and_svg_of_the_expected_size(tmp_path):
    ev = _ev()
    figs = plots.figures(ev)
    written = plots.save_plots(ev, tmp_path / "out")
    assert sorted(p.name for p in written) == sorted(
        f"{n}.{f}" for n in ("loss_budget", "confusion", "folds") for f in ("png", "svg"))
    for path in written:
        assert path.stat().st_size > 1000
        if path.suffix == ".png":
            w, h = figs[path.stem].get_size_inches() * plots.DPI
            assert png_size(path) == (round(w), round(h))
        else:
            assert ET.parse(path).getroot().tag.endswith("svg")
    assert not [p for p in (tmp_path / "out").iterdir() if p.name.startswith(".")]


def test_save_plots_without_folds_skips_the_fold_plot(tmp_path):
    names = [p.name for p in plots.save_plots(_ev(folds=False), tmp_path, formats=("png",))]
    assert names == ["loss_budget.png", "confusion.png"]


def test_many_classes_are_merged_in_the_heatmap():
    ev = _ev(folds=False, k=130)
    data = plots.confusion_data(ev)
    assert len(data["labels"]) == 100 and data["labels"][-1] == "other (31)"
    fig = plots.confusion_figure(ev)
    assert len(fig.axes[0].get_xticklabels()) == 100


def test_cli_plot_option_writes_the_files(tmp_path, capsys):
    import pandas as pd

    path = tmp_path / "predictions.csv"
    pd.DataFrame({"actual": list("aabbccdd") * 10, "predicted": list("abbbcadd") * 10,
                  "fold": [1, 2] * 40}).to_csv(path, index=False)
    assert main(["score", str(path), "--plot", str(tmp_path / "figs"), "--format", "json"]) == 0
    captured = capsys.readouterr()
    assert "6 plot files written" in captured.err
    assert len(list((tmp_path / "figs").glob("*.png"))) == 3


def test_svg_text_is_the_same_on_every_run():
    ev = _ev()
    first = plots.figure_svg(plots.loss_budget_figure(ev))
    assert first == plots.figure_svg(plots.loss_budget_figure(ev))
    assert ET.fromstring(first.encode()).tag.endswith("svg")

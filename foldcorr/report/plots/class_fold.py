"""Class by fold: per-class MCC in each fold, as a heatmap of the classes that matter most.

Rows are the classes with the largest shortfall share (report order), columns
the folds; each cell is coloured by the class's one-vs-rest MCC in that fold on
the project's two-sided "split" scale (clay below 0, paper at 0, teal towards
1) and, up to 400 cells, carries the value. A row that changes colour along
the folds is a class whose quality depends on the fold.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import warnings

import numpy as np
import xarray as xr

from foldcorr.decomposition import decompose
from foldcorr.errors import InvalidTensorError, UndefinedMetricWarning, check_choice
from foldcorr.figures import MULTILABEL
from foldcorr.report.plots.canvas import PALETTE, SPLIT, axes_for, finish, matplotlib_module, short
from foldcorr.tensor import CLASS, FOLD

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from foldcorr.evaluation import Evaluation

__all__ = ["CLASS_FOLD_FIGURES", "class_fold_figures", "class_fold_data", "class_fold_plot"]

#: Figures a class-by-fold heatmap can show, with their colour-bar words.
CLASS_FOLD_FIGURES = {"mcc": "One-vs-rest MCC of each class in each fold",
                      "shortfall_share": "Shortfall share of each class in each fold"}


def class_fold_figures(ev) -> xr.Dataset:
    """The per-class figures of every fold (dims ``class, fold``): ``mcc``, ``shortfall_share``.

    The one place the class-by-fold plot takes its values from: the
    evaluation's own ``per_class_fold`` table when it has one, else the exact
    decomposition of each fold's tensor (:func:`foldcorr.decomposition.decompose`,
    which broadcasts over folds), the same figures the per-fold report uses.

    Raises
    ------
    InvalidTensorError
        When the evaluation has no folds or is multilabel.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(tally(list("aabbcc") * 2, list("abbbca") + list("aabcbc"),
    ...                     folds=[1] * 6 + [2] * 6))
    >>> class_fold_figures(ev)["mcc"].sel(fold=2).round(3).values.tolist()
    [1.0, 0.25, 0.25]
    """
    if ev.kind == MULTILABEL or FOLD not in ev.tensor.dims:
        raise InvalidTensorError("the class-by-fold plot needs a multiclass evaluation with "
                                 "folds; this one has none" if ev.kind != MULTILABEL else
                                 "the class-by-fold plot is for multiclass evaluations")
    table = getattr(ev, "per_class_fold", None)
    if table is None:
        with warnings.catch_warnings():  # undefined cells show as such; the report names them
            warnings.simplefilter("ignore", UndefinedMetricWarning)
            table = decompose(ev.tensor, undefined=ev.undefined)
    return table[list(CLASS_FOLD_FIGURES)].transpose(CLASS, FOLD)


def _plain(values) -> list:
    return [v.item() if hasattr(v, "item") else v for v in values]


def class_fold_data(ev, *, figure: str = "mcc", max_classes: int = 20) -> dict:
    """The cells of the class-by-fold heatmap: top classes by shortfall share, folds as columns.

    Parameters
    ----------
    ev : Evaluation
        A multiclass evaluation with folds.
    figure : {"mcc", "shortfall_share"}, default "mcc"
        The figure in the cells.
    max_classes : int, default 20
        Rows drawn: the classes with the largest pooled shortfall share.

    Returns
    -------
    dict
        ``classes``, ``folds``, ``values`` (rows classes, columns folds),
        ``figure`` and ``rest_count`` (classes not drawn).

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(tally(list("aabbcc") * 2, list("abbbca") + list("aabcbc"),
    ...                     folds=[1] * 6 + [2] * 6))
    >>> d = class_fold_data(ev, max_classes=2)
    >>> d["classes"], d["folds"], d["values"].round(3).tolist()
    (['b', 'c'], [1, 2], [[0.707, 0.25], [0.632, 0.25]])
    """
    check_choice("figure", figure, tuple(CLASS_FOLD_FIGURES))
    table = class_fold_figures(ev)
    ranked = ev.ranked().coords[CLASS].values[:max_classes]
    values = table[figure].sel({CLASS: ranked})
    return {"classes": _plain(ranked), "folds": _plain(table.coords[FOLD].values),
            "values": np.asarray(values.values, dtype=float), "figure": figure,
            "rest_count": int(table.sizes[CLASS] - len(ranked))}


def class_fold_plot(ev: Evaluation, *, ax: Axes | None = None, figure: str = "mcc",
                    max_classes: int = 20) -> Axes | Figure:
    """Draw a class x fold heatmap of per-class MCC (or shortfall share) for the top classes.

    Parameters
    ----------
    ev : Evaluation
        A multiclass evaluation with folds.
    ax : matplotlib.axes.Axes, optional
        Draw here (a colour bar is added beside it) and return it; without it,
        a new figure is returned.
    figure, max_classes
        As in :func:`class_fold_data`.

    Returns
    -------
    matplotlib.figure.Figure or matplotlib.axes.Axes

    Raises
    ------
    InvalidTensorError
        When the evaluation has no folds or is multilabel.
    MissingDependencyError
        When matplotlib is not installed.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(tally(list("aabb") * 2, list("abbb") * 2, folds=[1] * 4 + [2] * 4))
    >>> class_fold_plot(ev).axes[0].get_xlabel()
    'fold'
    """
    colors = matplotlib_module("matplotlib.colors")
    data = class_fold_data(ev, figure=figure, max_classes=max_classes)
    values = data["values"]
    rows, cols = values.shape
    ax, fig = axes_for(ax, float(np.clip(3.5 + 0.7 * cols, 6.0, 16.0)),
                       float(np.clip(2.0 + 0.32 * rows, 3.5, 14.0)))
    if figure == "mcc":
        scale = colors.LinearSegmentedColormap.from_list("foldcorr_split", SPLIT)
        norm = colors.TwoSlopeNorm(vcenter=0.0, vmin=-1.0, vmax=1.0)
    else:
        scale = colors.LinearSegmentedColormap.from_list("foldcorr_split_upper", SPLIT[2:])
        norm = colors.Normalize(vmin=0.0, vmax=max(float(np.nanmax(values)), 1e-9))
    scale = scale.with_extremes(bad=PALETTE["mist"])
    image = ax.imshow(np.ma.masked_invalid(values), cmap=scale, norm=norm,
                      interpolation="nearest", aspect="auto")
    if rows * cols <= 400:
        for i in range(rows):
            for j in range(cols):
                v = values[i, j]
                if v == v:
                    strong = abs(norm(v) - 0.5) > 0.3 if figure == "mcc" else norm(v) > 0.6
                    ax.text(j, i, f"{v:.2f}", ha="center", va="center", fontsize=8,
                            color="white" if strong else PALETTE["ink"])
    ax.set_xticks(np.arange(cols), [short(f) for f in data["folds"]],
                  rotation=90 if cols > 12 else 0)
    ax.set_yticks(np.arange(rows), [short(c) for c in data["classes"]])
    ax.set_xlabel("fold")
    more = f" ({data['rest_count']} more not drawn)" if data["rest_count"] else ""
    ax.set_ylabel(f"class, largest shortfall share first{more}")
    ax.set_title(CLASS_FOLD_FIGURES[figure], loc="left")
    bar = ax.figure.colorbar(image, ax=ax, shrink=0.8, fraction=0.05, pad=0.02)
    bar.set_label("MCC" if figure == "mcc" else "shortfall share")
    return finish(ax, fig)

"""The confusion heatmap: where the errors go, with each class's recall on the diagonal.

Off the diagonal, each cell is coloured by its share of all confused samples
(the kiln scale, square-root, so rare confusions stay visible next to the
common ones); the diagonal is left pale and carries a disc whose area is the
class's recall. Classes are in report order (by shortfall share). Beyond
``max_classes`` classes the heatmap groups them: the classes carrying the most
confusion (as actual plus as predicted) keep a row and column of their own and
the rest are merged into one remainder row and column, labelled with their
number, which keeps every count.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from foldcorr.errors import OptionError
from foldcorr.report.plots.canvas import KILN, PALETTE, axes_for, finish, matplotlib_module, short
from foldcorr.tensor import ACTUAL, FOLD, PREDICTED
from foldcorr.tensor.backing import as_dense

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from foldcorr.evaluation import Evaluation

__all__ = ["confusion_data", "confusion_plot", "group_classes"]


def group_classes(counts: np.ndarray, keep: list[int]) -> np.ndarray:
    """The matrix of the classes ``keep`` (in that order) plus one remainder row and column.

    The remainder sums every other class's cells, so the total is unchanged.

    Examples
    --------
    >>> group_classes(np.array([[5, 1, 0], [2, 6, 0], [0, 3, 3]]), [1]).tolist()
    [[6, 2], [4, 8]]
    """
    rest = np.setdiff1d(np.arange(counts.shape[0]), keep)
    head = counts[np.ix_(keep, keep)]
    right = counts[np.ix_(keep, rest)].sum(axis=1, keepdims=True)
    bottom = counts[np.ix_(rest, keep)].sum(axis=0, keepdims=True)
    corner = counts[np.ix_(rest, rest)].sum(keepdims=True)
    return np.block([[head, right], [bottom, corner]])


def confusion_data(ev, *, max_classes: int = 100) -> dict:
    """The pooled confusion matrix in report order, grouped beyond ``max_classes`` classes.

    Parameters
    ----------
    ev : Evaluation
        A multiclass evaluation (pooled over folds).
    max_classes : int, default 100
        With more classes than this, the ``max_classes - 1`` classes carrying
        the most confusion (off-diagonal counts in their row and column) keep
        their own row and column, in report order, and the others are merged
        into a last remainder row and column.

    Returns
    -------
    dict
        ``labels`` (in drawing order; the last is ``"remainder (N classes)"``
        when grouped), ``counts`` (the matrix drawn), ``error_share`` (each
        off-diagonal cell over all off-diagonal counts; NaN on the diagonal),
        ``recall`` (diagonal over row sum; NaN for an empty row) and ``merged``
        (how many classes went into the remainder, 0 if none).

    Raises
    ------
    OptionError
        When ``max_classes`` is below 2.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(confusion_tensor([[5, 1, 0], [2, 6, 0], [0, 3, 3]], ["a", "b", "c"]))
    >>> d = confusion_data(ev, max_classes=2)
    >>> d["labels"], d["counts"].tolist()
    (['b', 'remainder (2 classes)'], [[6, 2], [4, 8]])
    >>> d["error_share"].round(2).tolist()
    [[nan, 0.33], [0.67, nan]]
    """
    if max_classes < 2:
        raise OptionError(f"`max_classes` must be at least 2; got {max_classes!r}")
    labels = ev.ranked().coords[ev.row_scope].values.tolist()
    tensor = ev.tensor.sum(FOLD) if FOLD in ev.tensor.dims else ev.tensor
    counts = as_dense(tensor.sel({ACTUAL: labels, PREDICTED: labels})).values
    merged = 0
    if len(labels) > max_classes:
        off = counts.sum(axis=0) + counts.sum(axis=1) - 2 * np.diagonal(counts)
        carried = np.argsort(-off, kind="stable")[: max_classes - 1]
        keep = sorted(carried.tolist())  # report order among the kept classes
        merged = len(labels) - len(keep)
        counts = group_classes(counts, keep)
        labels = [labels[i] for i in keep] + [f"remainder ({merged} classes)"]
    errors = counts.astype(float)
    np.fill_diagonal(errors, np.nan)
    wrong = np.nansum(errors)
    rows = counts.sum(axis=1).astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = errors / wrong if wrong > 0 else np.where(np.isnan(errors), np.nan, 0.0)
        recall = np.where(rows > 0, np.diagonal(counts) / np.where(rows > 0, rows, 1.0), np.nan)
    return {"labels": [v.item() if hasattr(v, "item") else v for v in labels],
            "counts": counts, "error_share": share, "recall": recall, "merged": merged}


def confusion_plot(ev: Evaluation, *, ax: Axes | None = None,
                   max_classes: int = 100) -> Axes | Figure:
    """Draw where the errors go: off-diagonal shares of all confusions, recall on the diagonal.

    Parameters
    ----------
    ev : Evaluation
        A multiclass evaluation.
    ax : matplotlib.axes.Axes, optional
        Draw here (a colour bar is added beside it) and return it; without it,
        a new figure is returned.
    max_classes : int, default 100
        As in :func:`confusion_data`; the plot says when classes were grouped.

    Returns
    -------
    matplotlib.figure.Figure or matplotlib.axes.Axes

    Raises
    ------
    MissingDependencyError
        When matplotlib is not installed.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(confusion_tensor([[5, 1], [2, 6]], ["a", "b"]))
    >>> confusion_plot(ev).axes[0].get_xlabel()
    'predicted as'
    """
    colors = matplotlib_module("matplotlib.colors")
    data = confusion_data(ev, max_classes=max_classes)
    labels, share, recall = data["labels"], data["error_share"], data["recall"]
    n = len(labels)
    side = float(np.clip(3.0 + 0.19 * n, 6.5, 22.0))
    ax, fig = axes_for(ax, side + 1.0, side)
    scale = colors.LinearSegmentedColormap.from_list("foldcorr_kiln", KILN).with_extremes(
        bad=PALETTE["mist"])
    top = float(np.nanmax(share)) if np.isfinite(share).any() and np.nanmax(share) > 0 else 1.0
    image = ax.imshow(np.ma.masked_invalid(share), cmap=scale,
                      norm=colors.PowerNorm(0.5, vmin=0.0, vmax=top),
                      interpolation="nearest", aspect="equal")
    ticks = np.arange(n)
    size = float(np.clip(0.6 * 72 * (side - 3.0) / max(n, 1), 4.5, 10.0))
    disc = (0.8 * 72 * (side - 1.5) / max(n, 1)) ** 2  # a full cell's area in points²
    ax.scatter(ticks, ticks, s=np.nan_to_num(recall) * disc, marker="o",
               color=PALETTE["teal"], edgecolors=PALETTE["ink"], linewidths=0.4, zorder=3)
    ax.set_xticks(ticks, [short(v) for v in labels], rotation=90, fontsize=size)
    ax.set_yticks(ticks, [short(v) for v in labels], fontsize=size)
    ax.tick_params(top=True, labeltop=True, bottom=False, labelbottom=False)
    if n <= 12:
        for i in range(n):
            for j in range(n):
                if i != j and data["counts"][i, j]:
                    dark = share[i, j] > 0.45 * top
                    ax.text(j, i, f"{int(data['counts'][i, j])}", ha="center", va="center",
                            fontsize=8, color="white" if dark else PALETTE["ink"])
    ax.set_xticks(ticks[:-1] + 0.5, minor=True)
    ax.set_yticks(ticks[:-1] + 0.5, minor=True)
    ax.grid(which="minor", color="white", linewidth=0.5 if n <= 60 else 0.0)
    ax.tick_params(which="minor", length=0)
    big = 11.0 + 0.35 * (side - 6.5)
    ax.xaxis.set_label_position("top")
    ax.set_xlabel("predicted as", fontsize=big)
    ax.set_ylabel("actual class", fontsize=big)
    grouped = (f"\n{data['merged']} classes carrying the least confusion are merged into the "
               "remainder row and column" if data["merged"] else "")
    wrong = data["counts"].sum() - np.trace(data["counts"])
    ax.set_title(f"Where the errors go: each off-diagonal cell's share of all "
                 f"{wrong:g} confused samples;\ndisc area on the diagonal = the class's recall{grouped}",
                 fontsize=big - 1, loc="left")
    bar = ax.figure.colorbar(image, ax=ax, shrink=0.5, fraction=0.04, pad=0.02)
    bar.set_label("share of all confused samples (square-root scale)", fontsize=big - 2)
    return finish(ax, fig)

"""Models side by side: R_K with intervals per model, and the paired difference of two models.

:func:`models_plot` (a many-model comparison) draws one row per model, best
first: its interval as a broad bar, its R_K as a dot (filled when the data
cannot separate it from the best, open when they can), the per-fold R_K as
small ticks on the row, and the best model's interval as a pale band down the
whole plot. :func:`difference_plot` (two models) draws the pooled R_K
difference B - A and each class's MCC difference with their paired intervals,
coloured by the side the interval falls on.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from foldcorr.report.plots.canvas import PALETTE, axes_for, finish, short

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from foldcorr.analysis.compare import Comparison
    from foldcorr.analysis.many import ManyComparison

__all__ = ["models_data", "models_plot", "difference_data", "difference_plot"]

MODEL = "model"


def _plain(values) -> list:
    return [v.item() if hasattr(v, "item") else v for v in values]


def models_data(result) -> dict:
    """R_K, interval, separation and per-fold R_K of each model, best first.

    Parameters
    ----------
    result : ManyComparison
        The comparison to draw.

    Returns
    -------
    dict
        ``models``, ``rk``, ``low``, ``high``, ``tied`` (not separated from the
        best), ``p_adjusted``, ``folds`` (per model, the per-fold R_K, or None),
        ``level``.

    Examples
    --------
    >>> from foldcorr.analysis.many import compare_many
    >>> r = compare_many(list("aabbccaabbcc"), {"x": list("aabbccaabbca"),
    ...                  "y": list("abbbccaabcca")}, n_resamples=200, seed=1)
    >>> models_data(r)["models"]
    ['x', 'y']
    """
    r = result.ranking
    folds = (None if result.per_fold is None
             else np.asarray(result.per_fold.sel({MODEL: r.coords[MODEL].values}).values, float))
    return {"models": _plain(r.coords[MODEL].values),
            "rk": r["rk"].values.astype(float), "low": r["low"].values.astype(float),
            "high": r["high"].values.astype(float),
            "tied": np.isin(r.coords[MODEL].values, list(result.tied)),
            "p_adjusted": r["p_adjusted"].values.astype(float), "folds": folds,
            "level": result.level}


def models_plot(result: ManyComparison, *, ax: Axes | None = None) -> Axes | Figure:
    """Draw R_K with intervals per model, best first, with the per-fold R_K as ticks.

    Parameters
    ----------
    result : ManyComparison
        The comparison to draw.
    ax : matplotlib.axes.Axes, optional
        Draw here and return it; without it, a new figure is returned.

    Returns
    -------
    matplotlib.figure.Figure or matplotlib.axes.Axes

    Raises
    ------
    MissingDependencyError
        When matplotlib is not installed.

    Examples
    --------
    >>> from foldcorr.analysis.many import compare_many
    >>> r = compare_many(list("aabbccaabbcc"), {"x": list("aabbccaabbca"),
    ...                  "y": list("abbbccaabcca")}, n_resamples=200, seed=1)
    >>> models_plot(r).axes[0].get_xlabel()
    'R_K (pooled over folds)'
    """
    d = models_data(result)
    n = len(d["models"])
    ax, fig = axes_for(ax, 9.0, max(3.0, 1.4 + 0.42 * n))
    y = np.arange(n)
    ax.axvspan(d["low"][0], d["high"][0], color=PALETTE["mist"], alpha=0.6, zorder=0,
               label="interval of the best model")
    ax.hlines(y, d["low"], d["high"], color=PALETTE["teal"], linewidth=7, alpha=0.35,
              label=f"{d['level']:.0%} interval")
    tied = d["tied"]
    ax.plot(d["rk"][tied], y[tied], "o", color=PALETTE["teal"], markersize=8,
            label="R_K: not separated from the best")
    ax.plot(d["rk"][~tied], y[~tied], "o", markerfacecolor="white",
            markeredgecolor=PALETTE["clay"], markeredgewidth=1.6, markersize=8,
            label="R_K: below the best (Holm-adjusted)")
    if d["folds"] is not None:
        for i, row in enumerate(d["folds"]):
            ax.plot(row, np.full(row.size, i), "|", color=PALETTE["ink"], markersize=11,
                    alpha=0.7, label="R_K of one fold" if i == 0 else None)
    right = max(float(np.nanmax(d["high"])), float(np.nanmax(d["folds"]))
                if d["folds"] is not None else -np.inf)
    for i in range(n):
        words = "best" if i == 0 else f"p adj. {d['p_adjusted'][i]:.3g}"
        ax.text(right, i, f"  {d['rk'][i]:.3f}  {words}", va="center", fontsize=8)
    ax.set_yticks(y, [short(m) for m in d["models"]])
    ax.set_ylim(n - 0.5, -0.5)
    lo = min(float(np.nanmin(d["low"])), float(np.nanmin(d["folds"]))
             if d["folds"] is not None else np.inf)
    ax.set_xlim(lo - 0.02, right + 0.25 * max(right - lo, 0.05))
    ax.set_xlabel("R_K (pooled over folds)")
    ax.set_title(f"R_K per model, best first, with {d['level']:.0%} bootstrap intervals",
                 loc="left")
    ax.grid(axis="x", color=PALETTE["mist"], linewidth=0.6)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.16), ncols=3, fontsize=8,
              frameon=False)
    return finish(ax, fig)


def difference_data(result, *, max_classes: int = 25) -> dict:
    """The pooled R_K difference and the per-class MCC differences (B - A) with intervals.

    Parameters
    ----------
    result : Comparison
        A two-model comparison.
    max_classes : int, default 25
        Classes drawn, largest absolute difference first.

    Returns
    -------
    dict
        ``labels`` (``"R_K"`` first, then classes), ``difference``, ``low``,
        ``high`` and ``level``.

    Examples
    --------
    >>> from foldcorr.analysis.compare import compare_models
    >>> from foldcorr.tensor import joint_tally
    >>> c = compare_models(joint_tally(list("aabbcc"), list("abbbcc"), list("aabbca")),
    ...                    n_resamples=200, seed=1)
    >>> difference_data(c)["labels"][0]
    'R_K'
    """
    per = result.per_class
    order = np.argsort(-np.abs(np.nan_to_num(per["difference"].values)), kind="stable")
    per = per.isel(**{per["difference"].dims[0]: order[:max_classes]})
    return {"labels": ["R_K"] + _plain(per.coords[per["difference"].dims[0]].values),
            "difference": np.r_[result.difference, per["difference"].values.astype(float)],
            "low": np.r_[result.ci[0], per["low"].values.astype(float)],
            "high": np.r_[result.ci[1], per["high"].values.astype(float)],
            "level": result.level}


def difference_plot(result: Comparison, *, ax: Axes | None = None,
                    max_classes: int = 25) -> Axes | Figure:
    """Draw B - A: the pooled R_K difference and each class's MCC difference, with intervals.

    Parameters
    ----------
    result : Comparison
        A two-model comparison.
    ax : matplotlib.axes.Axes, optional
        Draw here and return it; without it, a new figure is returned.
    max_classes : int, default 25
        As in :func:`difference_data`.

    Returns
    -------
    matplotlib.figure.Figure or matplotlib.axes.Axes

    Examples
    --------
    >>> from foldcorr.analysis.compare import compare_models
    >>> from foldcorr.tensor import joint_tally
    >>> c = compare_models(joint_tally(list("aabbcc"), list("abbbcc"), list("aabbca")),
    ...                    n_resamples=200, seed=1)
    >>> difference_plot(c).axes[0].get_xlabel()
    'model B minus model A'
    """
    d = difference_data(result, max_classes=max_classes)
    n = len(d["labels"])
    ax, fig = axes_for(ax, 8.5, max(3.0, 1.4 + 0.34 * n))
    y = np.arange(n)
    side = np.where(d["low"] > 0, "teal", np.where(d["high"] < 0, "clay", "ink"))
    ax.axvline(0.0, color=PALETTE["ink"], linewidth=0.8)
    ax.axhspan(-0.5, 0.5, color=PALETTE["mist"], alpha=0.5, zorder=0)
    for i in range(n):
        colour = PALETTE[side[i]]
        ax.hlines(i, d["low"][i], d["high"][i], color=colour, linewidth=5, alpha=0.4)
        ax.plot(d["difference"][i], i, "o" if side[i] != "ink" else "o", color=colour,
                markerfacecolor=colour if side[i] != "ink" else "white", markersize=7)
    ax.set_yticks(y, ["R_K (pooled)"] + [f"MCC of {short(v)}" for v in d["labels"][1:]])
    ax.set_ylim(n - 0.5, -0.5)
    ax.set_xlabel("model B minus model A")
    ax.set_title(f"B − A with paired {d['level']:.0%} intervals: filled teal, B better; "
                 "filled clay, A better;\nopen, the data cannot tell", loc="left", fontsize=10)
    ax.grid(axis="x", color=PALETTE["mist"], linewidth=0.6)
    for s in ("top", "right"):
        ax.spines[s].set_visible(False)
    return finish(ax, fig)

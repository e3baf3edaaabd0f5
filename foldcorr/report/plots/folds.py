"""R_K fold by fold (macro MCC for a multilabel evaluation), with intervals when known.

Each fold is a point on its own column, with its interval as a vertical bar
when an ``uncertainty`` section gives per-fold intervals; the pooled figure is
a solid line across and the mean of the folds a dotted one, both labelled.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from foldcorr.errors import InvalidTensorError
from foldcorr.figures import BUDGETED, MULTILABEL
from foldcorr.report.plots.canvas import PALETTE, axes_for, finish, short
from foldcorr.tensor import FOLD

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from foldcorr.evaluation import Evaluation

__all__ = ["fold_data", "fold_plot"]


def _fold_intervals(ev, folds):
    """(low, high) per fold from an ``uncertainty`` section, or None.

    Accepted shapes, looked up as attributes (or keys) ``fold_intervals``,
    ``per_fold`` or ``folds`` of ``ev.extras["uncertainty"]``: an xarray
    Dataset with dim ``fold`` and variables ``low``/``high`` (or
    ``lower``/``upper``, ``rk_low``/``rk_high``), or a DataArray with dim
    ``fold`` and a two-entry dim ``bound``. Anything else is ignored.
    """
    import xarray as xr

    unc = ev.extras.get("uncertainty")
    for name in ("fold_intervals", "per_fold", "folds"):
        obj = unc.get(name) if isinstance(unc, dict) else getattr(unc, name, None)
        try:
            if isinstance(obj, xr.Dataset) and FOLD in obj.dims:
                for lo, hi in (("low", "high"), ("lower", "upper"), ("rk_low", "rk_high")):
                    if lo in obj and hi in obj:
                        return tuple(np.asarray(obj[v].sel({FOLD: folds}).values,
                                                dtype=float).reshape(-1) for v in (lo, hi))
            if isinstance(obj, xr.DataArray) and FOLD in obj.dims and obj.sizes.get("bound") == 2:
                obj = obj.sel({FOLD: folds})
                return tuple(np.asarray(obj.isel(bound=i).values, dtype=float).reshape(-1)
                             for i in (0, 1))
        except (KeyError, ValueError, TypeError):
            return None
    return None


def fold_data(ev) -> dict:
    """Per-fold R_K with intervals when an uncertainty section provides them.

    Returns
    -------
    dict
        ``folds`` (labels), ``rk`` (per fold), ``low`` and ``high`` (per fold,
        or None), ``pooled`` (pooled R_K), ``mean`` (mean per-fold R_K) and
        ``name`` (the figure's name: R_K, or macro MCC for multilabel).

    Raises
    ------
    InvalidTensorError
        When the evaluation has no folds.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(tally(list("aabbcc") * 2, list("abbbca") + list("aabcbc"),
    ...                     folds=[1] * 6 + [2] * 6))
    >>> d = fold_data(ev)
    >>> d["folds"], [round(v, 3) for v in d["rk"]], d["low"]
    ([1, 2], [0.522, 0.5], None)
    """
    if ev.folds is None:
        raise InvalidTensorError("the per-fold plot needs folds; this evaluation has none")
    coords = ev.folds.coords[FOLD].values
    key = BUDGETED[ev.kind]
    rk = [float(v) for v in ev.folds[key].values]
    interval = _fold_intervals(ev, coords)
    low, high = (None, None) if interval is None else (interval[0].tolist(), interval[1].tolist())
    mean = ev.fold_summary.mean_rk if ev.fold_summary is not None else np.mean(rk)
    return {"folds": [v.item() if hasattr(v, "item") else v for v in coords], "rk": rk,
            "low": low, "high": high, "pooled": ev.figure(key), "mean": float(mean),
            "name": "macro MCC" if ev.kind == MULTILABEL else "R_K"}


def fold_plot(ev: Evaluation, *, ax: Axes | None = None) -> Axes | Figure:
    """Draw R_K of each fold, with the pooled and mean R_K (and intervals when known).

    Parameters
    ----------
    ev : Evaluation
        An evaluation with folds.
    ax : matplotlib.axes.Axes, optional
        Draw here and return it; without it, a new figure is returned.

    Returns
    -------
    matplotlib.figure.Figure or matplotlib.axes.Axes

    Raises
    ------
    InvalidTensorError
        When the evaluation has no folds.
    MissingDependencyError
        When matplotlib is not installed.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(tally(list("aabb") * 2, list("abbb") * 2, folds=[1] * 4 + [2] * 4))
    >>> fold_plot(ev).axes[0].get_ylabel()
    'R_K'
    """
    data = fold_data(ev)
    n = len(data["folds"])
    ax, fig = axes_for(ax, float(np.clip(3.0 + 0.45 * n, 6.0, 14.0)), 4.2)
    x = np.arange(n)
    rk, name = np.asarray(data["rk"]), data["name"]
    if data["low"] is not None:
        low, high = np.asarray(data["low"]), np.asarray(data["high"])
        ax.vlines(x, low, high, color=PALETTE["teal"], linewidth=3.0, alpha=0.45,
                  label="interval of the fold")
    ax.plot(x, rk, "s", color=PALETTE["teal"], markersize=7, label=f"{name} of the fold")
    ax.axhline(data["pooled"], color=PALETTE["ink"], linewidth=1.2,
               label=f"pooled {name} ({data['pooled']:.3f})")
    ax.axhline(data["mean"], color=PALETTE["ochre"], linestyle=":", linewidth=1.8,
               label=f"mean of the folds ({data['mean']:.3f})")
    ax.set_xticks(x, [short(f) for f in data["folds"]], rotation=90 if n > 12 else 0)
    ax.set_xlabel("fold")
    ax.set_ylabel(name)
    ax.set_title(f"{name} per fold")
    values = [*rk, data["pooled"]] + ([*data["low"], *data["high"]]
                                      if data["low"] is not None else [])
    lo, hi = min(values), max(values)
    pad = max(0.02, 0.15 * (hi - lo))
    ax.set_ylim(lo - pad, min(1.0 + pad / 2, hi + pad))
    ax.grid(axis="y", color=PALETTE["mist"], linewidth=0.6)
    ax.set_axisbelow(True)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.legend(fontsize=8, loc="best", frameon=False)
    return finish(ax, fig)

"""Plots of an evaluation: the loss budget, the confusion heatmap and R_K per fold.

A multilabel evaluation gets the loss budget of its macro MCC, label by label,
and its macro MCC per fold (no heatmap: each label is one 2 x 2 matrix).

Each plot has a ``*_data(ev)`` function that returns the numbers drawn (so
they can be checked) and a ``*_figure(ev)`` function that returns a
:class:`matplotlib.figure.Figure`; :func:`save_plots` writes them to files.
Figures are made without pyplot on the Agg canvas, so nothing here touches
global plotting state or needs a display. matplotlib is optional (the
``plot`` extra) and is imported only when a figure is made. Nothing here
computes a metric: the figures come from the :class:`~foldcorr.evaluation.Evaluation`.

Colours: a colour-blind-safe set drawn from the palette of Okabe and Ito
(2008); the heatmap runs from white through blue to dark navy, monotone in
lightness, so it also reads in grey scale. Colour never carries meaning
alone: bars are labelled and values are printed.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from foldcorr.errors import InvalidTensorError, require
from foldcorr.figures import BUDGETED, MULTICLASS, POOLED
from foldcorr.report.tables import plot_text

__all__ = [
    "COLOURS",
    "DPI",
    "loss_budget_data",
    "loss_budget_figure",
    "confusion_data",
    "confusion_figure",
    "fold_data",
    "fold_figure",
    "figures",
    "figure_svg",
    "save_plots",
]

#: Named colours (Okabe & Ito 2008, colour-blind safe).
COLOURS = {
    "mismatch": "#999999",  # grey
    "class": "#D55E00",  # vermillion
    "other": "#E69F00",  # orange
    "result": "#0072B2",  # blue
    "pooled": "#D55E00",
    "mean": "#009E73",  # bluish green
    "point": "#0072B2",
}

#: Resolution of PNG files; pixel size = figure size in inches x DPI.
DPI = 100

#: Class names longer than this are shortened with an ellipsis on axes.
MAX_LABEL = 22

_PLURAL = {"class": "classes", "label": "labels"}

_HEAT = ("#FFFFFF", "#C6DBEF", "#6BAED6", "#2171B5", "#08306B")


def _short(label) -> str:
    text = str(label)
    text = text if len(text) <= MAX_LABEL else text[: MAX_LABEL - 1] + "\u2026"
    return plot_text(text)


def _mpl():
    require("matplotlib", extra="plot", purpose="drawing plots")
    figure = require("matplotlib.figure", extra="plot", purpose="drawing plots")
    agg = require("matplotlib.backends.backend_agg", extra="plot", purpose="drawing plots")
    return figure, agg


def _new_figure(width: float, height: float):
    figure, agg = _mpl()
    fig = figure.Figure(figsize=(width, height), dpi=DPI, layout="constrained")
    agg.FigureCanvasAgg(fig)
    return fig


def _by_drag(ev):
    """Class (or label) names and drags, largest drag first, ties in tensor order."""
    d = ev.rows
    drags = np.asarray(d["drag"].values, dtype=float)
    order = np.argsort(-np.nan_to_num(drags), kind="stable")
    labels = [v.item() if hasattr(v, "item") else v for v in d.coords[ev.row_scope].values]
    return [labels[i] for i in order], drags[order]


def _budgeted(ev) -> tuple[str, str]:
    """Key and short name of the figure the drags add up to: R_K, or macro MCC (multilabel)."""
    key = BUDGETED[ev.kind]
    return key, next(f.headline or f.label for f in ev.figures(POOLED) if f.key == key)


# --------------------------------------------------------------------------
# (1) the loss budget


def loss_budget_data(ev, *, max_classes: int = 15) -> dict:
    """The bars of the loss budget: from 1 down to R_K.

    Parameters
    ----------
    ev : Evaluation
        The evaluation to draw.
    max_classes : int, default 15
        Classes shown with a bar of their own (largest drag first); the rest
        are grouped into one "other" bar. Classes with no drag are never
        shown alone.

    Returns
    -------
    dict
        ``labels``, ``kinds`` (``"mismatch"``, ``"class"`` or ``"other"``),
        ``sizes`` (the loss of each bar), ``starts`` (the level each bar
        starts from, 1 for the first), ``rk`` (pooled R_K). The sizes sum to
        ``1 - rk``: the marginal mismatch plus every class's drag.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(confusion_tensor([[5, 1, 0], [2, 6, 0], [0, 3, 3]], ["a", "b", "c"]))
    >>> data = loss_budget_data(ev, max_classes=2)
    >>> data["labels"]
    ['marginal mismatch', 'b', 'a', 'other (1 class)']
    >>> round(sum(data["sizes"]), 12) == round(1 - data["rk"], 12)
    True
    """
    labels, drags = _by_drag(ev)
    shown = [i for i in range(len(labels)) if drags[i] > 0][:max_classes]
    rest = [i for i in range(len(labels)) if i not in set(shown)]
    out_labels, kinds, sizes = [], [], []
    if "marginal_mismatch" in ev.pooled:
        out_labels, kinds = ["marginal mismatch"], ["mismatch"]
        sizes = [float(ev.figure("marginal_mismatch"))]
    for i in shown:
        out_labels.append(labels[i])
        kinds.append("class")
        sizes.append(float(drags[i]))
    rest_drag = float(drags[rest].sum()) if rest else 0.0
    if rest and rest_drag > 0:
        noun = ev.row_scope if len(rest) == 1 else _PLURAL[ev.row_scope]
        out_labels.append(f"other ({len(rest)} {noun})")
        kinds.append("other")
        sizes.append(rest_drag)
    starts = list(1.0 - np.concatenate([[0.0], np.cumsum(sizes)[:-1]]))
    key, name = _budgeted(ev)
    return {"labels": out_labels, "kinds": kinds, "sizes": sizes, "starts": starts,
            "rk": float(ev.figure(key)), "name": name, "unit": ev.row_scope}


def loss_budget_figure(ev, *, max_classes: int = 15):
    """A waterfall from 1 down to R_K: the marginal mismatch, then each class's drag.

    Parameters
    ----------
    ev : Evaluation
        The evaluation to draw.
    max_classes : int, default 15
        As in :func:`loss_budget_data`.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    MissingDependencyError
        When matplotlib is not installed (the ``plot`` extra).

    Notes
    -----
    :math:`1 - R_K = \\sum_k w_k (1 - \\mathrm{MCC}_k) + (1 - \\sum_k w_k)`
    (see ``docs/decomposition.md``): each bar is one term, so the bars end
    exactly at R_K.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(confusion_tensor([[5, 1], [2, 6]], ["a", "b"]))
    >>> loss_budget_figure(ev).axes[0].get_title()
    'Where R_K falls short of 1 (R_K = 0.577)'
    """
    data = loss_budget_data(ev, max_classes=max_classes)
    n = len(data["labels"]) + 1
    fig = _new_figure(9.0, max(3.5, 1.2 + 0.34 * n))
    ax = fig.add_subplot()
    rk = data["rk"]
    y = np.arange(n)
    # the axis starts a little left of R_K, so that small losses stay visible
    left = max(-1.05, rk - max(0.25 * (1.0 - rk), 0.02) - 0.06)
    for i, (size, start, kind) in enumerate(zip(data["sizes"], data["starts"], data["kinds"])):
        ax.barh(i, -size, left=start, color=COLOURS[kind], edgecolor="white", linewidth=0.5,
                height=0.7)
        ax.text(start - size - 0.002 * (1.0 - left), i, f"\u2212{size:.3f} ", va="center",
                ha="right", fontsize=8)
    ax.barh(n - 1, rk - left, left=left, color=COLOURS["result"], height=0.7)
    name, unit = data["name"], data["unit"]
    ax.text(rk, n - 1, f" {name} = {rk:.3f}", va="center", ha="left", fontsize=9,
            fontweight="bold")
    ax.set_yticks(y, [_short(v) for v in data["labels"]] + [name])
    ax.invert_yaxis()
    ax.set_xlim(left, 1.0 + 0.02 * (1.0 - left))
    ax.axvline(1.0, color="black", linewidth=0.8)
    ax.set_xlabel(f"correlation (1 = perfect; the axis starts at {left:.2f}); "
                  "each bar takes its loss off the level above")
    ax.set_title(f"Where {name} falls short of 1 ({name} = {rk:.3f})")
    ax.grid(axis="x", color="#DDDDDD", linewidth=0.6)
    ax.set_axisbelow(True)
    _legend(ax, [("marginal mismatch", "mismatch"), (f"drag of one {unit}", "class"),
                 (f"drag of the other {_PLURAL[unit]}", "other"), (name, "result")],
            present=set(data["kinds"]) | {"result"}, loc="upper left")
    return fig


def _legend(ax, entries, present, **kw):
    patches = require("matplotlib.patches", extra="plot", purpose="drawing plots")
    handles = [patches.Patch(color=COLOURS[kind], label=label)
               for label, kind in entries if kind in present]
    ax.legend(handles=handles, loc=kw.pop("loc", "lower right"), fontsize=8, **kw)


# --------------------------------------------------------------------------
# (2) the confusion heatmap


def confusion_data(ev, *, max_classes: int = 100) -> dict:
    """The row-normalised confusion matrix, classes ordered by drag.

    Parameters
    ----------
    ev : Evaluation
        The evaluation to draw (pooled over folds).
    max_classes : int, default 100
        With more classes than this, the ``max_classes - 1`` classes with the
        largest drag are kept and the others merged into one "other" class
        (its row and column sum theirs).

    Returns
    -------
    dict
        ``labels`` (in drawing order), ``counts`` (the reordered, possibly
        merged matrix) and ``shares`` (each row divided by its sum; NaN in
        rows with no samples), ``merged`` (how many classes went into
        "other", 0 if none).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(confusion_tensor([[5, 1, 0], [2, 6, 0], [0, 3, 3]], ["a", "b", "c"]))
    >>> d = confusion_data(ev, max_classes=2)
    >>> d["labels"], d["counts"].tolist()
    (['b', 'other (2)'], [[6, 2], [4, 8]])
    >>> d["shares"].tolist()
    [[0.75, 0.25], [0.333..., 0.666...]]
    """
    if max_classes < 2:
        from foldcorr.errors import OptionError

        raise OptionError(f"`max_classes` must be at least 2; got {max_classes!r}")
    labels, _ = _by_drag(ev)
    from foldcorr.tensor import ACTUAL, FOLD, PREDICTED

    tensor = ev.tensor.sum(FOLD) if FOLD in ev.tensor.dims else ev.tensor
    counts = tensor.sel({ACTUAL: labels, PREDICTED: labels}).values
    merged = 0
    if len(labels) > max_classes:
        keep = max_classes - 1
        merged = len(labels) - keep
        head = counts[:keep, :keep]
        right = counts[:keep, keep:].sum(axis=1, keepdims=True)
        bottom = counts[keep:, :keep].sum(axis=0, keepdims=True)
        corner = counts[keep:, keep:].sum(keepdims=True)
        counts = np.block([[head, right], [bottom, corner]])
        labels = labels[:keep] + [f"other ({merged})"]
    rows = counts.sum(axis=1, keepdims=True).astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        shares = np.where(rows > 0, counts / np.where(rows > 0, rows, 1.0), np.nan)
    return {"labels": [v.item() if hasattr(v, "item") else v for v in labels],
            "counts": counts, "shares": shares, "merged": merged}


def confusion_figure(ev, *, max_classes: int = 100):
    """The confusion matrix as a row-normalised heatmap, classes ordered by drag.

    Parameters
    ----------
    ev : Evaluation
        The evaluation to draw.
    max_classes : int, default 100
        As in :func:`confusion_data`.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    MissingDependencyError
        When matplotlib is not installed.

    Notes
    -----
    Colour shows the share of each actual class's samples given to each
    predicted class, on a square-root scale so that small confusions stay
    visible next to a dominant diagonal. With at most 12 classes every cell
    also shows its share in figures.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(confusion_tensor([[5, 1], [2, 6]], ["a", "b"]))
    >>> confusion_figure(ev).axes[0].get_xlabel()
    'predicted class'
    """
    colors = require("matplotlib.colors", extra="plot", purpose="drawing plots")
    data = confusion_data(ev, max_classes=max_classes)
    labels, shares = data["labels"], data["shares"]
    n = len(labels)
    side = float(np.clip(3.0 + 0.19 * n, 7.0, 22.0))
    fig = _new_figure(side + 0.8, side)
    ax = fig.add_subplot()
    cmap = colors.LinearSegmentedColormap.from_list("foldcorr_heat", _HEAT).with_extremes(
        bad="#F2F2F2")
    image = ax.imshow(np.ma.masked_invalid(shares), cmap=cmap,
                      norm=colors.PowerNorm(0.5, vmin=0.0, vmax=1.0),
                      interpolation="nearest", aspect="equal")
    size = float(np.clip(0.6 * 72 * (side - 3.0) / max(n, 1), 5.0, 10.0))
    ticks = np.arange(n)
    ax.set_xticks(ticks, [_short(v) for v in labels], rotation=90, fontsize=size)
    ax.set_yticks(ticks, [_short(v) for v in labels], fontsize=size)
    if n <= 12:
        for i in range(n):
            for j in range(n):
                v = shares[i, j]
                if v == v:
                    ax.text(j, i, f"{v:.2f}", ha="center", va="center", fontsize=8,
                            color="white" if v > 0.45 else "black")
    big = 11.0 + 0.35 * (side - 7.0)  # headings grow with the figure
    ax.set_xlabel("predicted class", fontsize=big)
    ax.set_ylabel("actual class", fontsize=big)
    extra = f"; the {data['merged']} classes with least drag merged" if data["merged"] else ""
    ax.set_title(f"Confusion matrix, each row as shares of the actual class\n"
                 f"(classes by drag, largest first{extra})", fontsize=big + 1)
    bar = fig.colorbar(image, ax=ax, shrink=0.5, fraction=0.04, pad=0.02, ticks=[0, 0.05, 0.2, 0.5, 1.0])
    bar.set_label("share of the actual class's samples (square-root scale)", fontsize=big - 1)
    return fig


# --------------------------------------------------------------------------
# (3) R_K per fold


def _fold_intervals(ev, folds):
    """(low, high) per fold from an ``uncertainty`` section, or None.

    Accepted shapes, looked up as attributes (or keys) ``fold_intervals``,
    ``per_fold`` or ``folds`` of ``ev.extras["uncertainty"]``: an xarray
    Dataset with dim ``fold`` and variables ``low``/``high`` (or
    ``lower``/``upper``, ``rk_low``/``rk_high``), or a DataArray with dim
    ``fold`` and a two-entry dim ``bound``. Anything else is ignored.
    """
    unc = ev.extras.get("uncertainty")
    if unc is None:
        return None
    try:
        import xarray as xr

        for name in ("fold_intervals", "per_fold", "folds"):
            obj = unc.get(name) if isinstance(unc, dict) else getattr(unc, name, None)
            if obj is None:
                continue
            if isinstance(obj, xr.Dataset) and "fold" in obj.dims:
                for lo, hi in (("low", "high"), ("lower", "upper"), ("rk_low", "rk_high")):
                    if lo in obj and hi in obj:
                        pair = obj[lo].sel(fold=folds), obj[hi].sel(fold=folds)
                        return tuple(np.asarray(p.values, dtype=float).reshape(-1) for p in pair)
            if isinstance(obj, xr.DataArray) and "fold" in obj.dims and "bound" in obj.dims:
                obj = obj.sel(fold=folds)
                if obj.sizes["bound"] == 2:
                    return tuple(np.asarray(obj.isel(bound=i).values, dtype=float).reshape(-1)
                                 for i in (0, 1))
    except (KeyError, ValueError, TypeError, AttributeError):
        return None
    return None


def fold_data(ev) -> dict:
    """Per-fold R_K with intervals when an uncertainty section provides them.

    Returns
    -------
    dict
        ``folds`` (labels), ``rk`` (per fold), ``low`` and ``high`` (per fold,
        or None), ``pooled`` (pooled R_K) and ``mean`` (mean per-fold R_K).

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
    folds = [v.item() if hasattr(v, "item") else v for v in ev.folds.coords["fold"].values]
    key, name = _budgeted(ev)
    rk = [float(v) for v in ev.folds[key].values]
    interval = _fold_intervals(ev, ev.folds.coords["fold"].values)
    low, high = (None, None) if interval is None else ([float(v) for v in interval[0]],
                                                        [float(v) for v in interval[1]])
    mean = ev.fold_summary.mean_rk if ev.fold_summary is not None else np.mean(rk)
    return {"folds": folds, "rk": rk, "low": low, "high": high, "pooled": ev.figure(key),
            "mean": float(mean), "name": name}


def fold_figure(ev):
    """R_K of each fold, with the pooled and mean R_K (and intervals when known).

    Returns
    -------
    matplotlib.figure.Figure

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
    >>> fold_figure(ev).axes[0].get_ylabel()
    'R_K'
    """
    data = fold_data(ev)
    n = len(data["folds"])
    fig = _new_figure(float(np.clip(3.0 + 0.45 * n, 6.0, 14.0)), 4.2)
    ax = fig.add_subplot()
    x = np.arange(n)
    rk, name = np.asarray(data["rk"]), data["name"]
    if data["low"] is not None:
        low, high = np.asarray(data["low"]), np.asarray(data["high"])
        ax.errorbar(x, rk, yerr=[rk - low, high - rk], fmt="o", color=COLOURS["point"],
                    ecolor=COLOURS["point"], capsize=4, label=f"{name} of the fold, with interval")
    else:
        ax.plot(x, rk, "o", color=COLOURS["point"], label=f"{name} of the fold")
    ax.axhline(data["pooled"], color=COLOURS["pooled"], linestyle="--", linewidth=1.2,
               label=f"pooled {name} ({data['pooled']:.3f})")
    ax.axhline(data["mean"], color=COLOURS["mean"], linestyle=":", linewidth=1.5,
               label=f"mean of the folds ({data['mean']:.3f})")
    ax.set_xticks(x, [_short(f) for f in data["folds"]], rotation=90 if n > 12 else 0)
    ax.set_xlabel("fold")
    ax.set_ylabel(name)
    ax.set_title(f"{name} per fold")
    values = [*rk, data["pooled"]] + (list(data["low"]) + list(data["high"])
                                      if data["low"] is not None else [])
    lo, hi = min(values), max(values)
    pad = max(0.02, 0.15 * (hi - lo))
    ax.set_ylim(lo - pad, min(1.0 + pad / 2, hi + pad))
    ax.grid(axis="y", color="#DDDDDD", linewidth=0.6)
    ax.set_axisbelow(True)
    ax.legend(fontsize=8, loc="best")
    return fig


# --------------------------------------------------------------------------
# all of them, and files


def figures(ev, *, max_classes: int = 100, budget_classes: int = 15) -> dict:
    """Every plot that applies to ``ev``, by name (the fold plot only with folds).

    Returns
    -------
    dict of str to matplotlib.figure.Figure
        Keys ``loss_budget``, ``confusion`` (multiclass) and, with folds, ``folds``.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> sorted(figures(evaluate(confusion_tensor([[5, 1], [2, 6]], ["a", "b"]))))
    ['confusion', 'loss_budget']
    """
    out = {"loss_budget": loss_budget_figure(ev, max_classes=budget_classes)}
    if ev.kind == MULTICLASS:  # a multilabel tensor is one 2 x 2 matrix per label
        out["confusion"] = confusion_figure(ev, max_classes=max_classes)
    if ev.folds is not None:
        out["folds"] = fold_figure(ev)
    return out


def save_plots(ev, folder, *, formats=("png", "svg"), max_classes: int = 100) -> list[Path]:
    """Write every plot of :func:`figures` into ``folder``, one file per format.

    Parameters
    ----------
    ev : Evaluation
        The evaluation to draw.
    folder : str or path
        Output folder, created if needed. Files are named after the plots
        (``loss_budget.png``, ``confusion.svg``, ...); each is written whole
        or not at all.
    formats : sequence of {"png", "svg"}, default ("png", "svg")
        File formats.
    max_classes : int, default 100
        As in :func:`confusion_data`.

    Returns
    -------
    list of pathlib.Path
        The files written.

    Raises
    ------
    MissingDependencyError
        When matplotlib is not installed.
    InvalidInputError
        When ``folder`` cannot be created or written.
    OptionError
        On an unknown format.

    Examples
    --------
    >>> import tempfile
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(confusion_tensor([[5, 1], [2, 6]], ["a", "b"]))
    >>> [p.name for p in save_plots(ev, tempfile.mkdtemp())]
    ['loss_budget.png', 'loss_budget.svg', 'confusion.png', 'confusion.svg']
    """
    from foldcorr._files import atomic_target
    from foldcorr.errors import InvalidInputError, check_choice

    for fmt in formats:
        check_choice("formats", fmt, ("png", "svg"))
    target = Path(folder)
    try:
        target.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InvalidInputError(f"cannot create the plot folder {str(target)!r}: "
                                f"{exc.strerror}") from None
    written = []
    for name, fig in figures(ev, max_classes=max_classes).items():
        for fmt in formats:
            path = target / f"{name}.{fmt}"
            with atomic_target(path, suffix=f".{fmt}") as tmp:
                _save(fig, tmp, fmt)
            written.append(path)
    return written


def figure_svg(fig) -> str:
    """A figure as SVG text, e.g. to embed inline in an HTML page.

    The text is the same for the same figure on every run (fixed ids, no date).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> svg = figure_svg(loss_budget_figure(evaluate(confusion_tensor([[5, 1], [2, 6]], [0, 1]))))
    >>> svg.lstrip().startswith("<?xml"), "</svg>" in svg
    (True, True)
    """
    import io

    buffer = io.BytesIO()
    _save(fig, buffer, "svg")
    return buffer.getvalue().decode("utf-8")


def _save(fig, target, fmt: str) -> None:
    mpl = require("matplotlib", extra="plot", purpose="drawing plots")
    # fixed ids and no timestamp, so the same evaluation gives the same SVG bytes
    with mpl.rc_context({"svg.hashsalt": "foldcorr"}):
        fig.savefig(target, format=fmt, dpi=DPI,
                    metadata={"Date": None} if fmt == "svg" else None)

"""The threshold plot of a score sweep, built around MCC.

The pooled MCC curve is the thick line; with folds, each fold's own MCC curve
is a thin line beside it. The in-sample optimum is a star on the pooled curve,
labelled as optimistic. Each fold's cross-fold choice (the threshold picked on
the other folds) is a downward triangle on that fold's curve at that
threshold, and the mean held-out MCC of those choices is a short horizontal
bar spanning the thresholds chosen, so the gap between the star and the bar
is the optimism of the in-sample choice. A user's threshold is a diamond on
the pooled curve. Precision, recall, F1 and accuracy are drawn only on request.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from foldcorr.analysis.thresholds import THRESHOLD
from foldcorr.errors import OptionError
from foldcorr.report.plots.canvas import PALETTE, axes_for, finish
from foldcorr.report.tables import plot_text

if TYPE_CHECKING:
    from collections.abc import Hashable, Sequence

    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from foldcorr.analysis.thresholds import SweepResult

__all__ = ["MAX_POINTS", "COMPANIONS", "threshold_data", "threshold_plot"]

#: Thresholds drawn per pooled curve at most (evenly spaced, plus the best).
MAX_POINTS = 4000

#: Companion figures that can be asked for, with their line styles (grey, dashed: never
#: the eye's first stop).
COMPANIONS = {"precision": (0, (5, 2)), "recall": (0, (1, 1.5)), "f1": (0, (5, 2, 1, 2)),
              "accuracy": (0, (2, 3))}


def _pick(result, label):
    if label is None:
        return result.labels[0]
    for s in result.labels:
        if s.label == label:
            return s
    raise OptionError(f"`label` {label!r} is not a label of this sweep; it has "
                      f"{[s.label for s in result.labels]!r}")


def threshold_data(result, *, label=None, companions=()) -> dict:
    """The curves and marks of the threshold plot of one label.

    Parameters
    ----------
    result : SweepResult
        The sweep to draw.
    label : optional
        Which label (default the first; a binary sweep has one).
    companions : sequence of {"precision", "recall", "f1", "accuracy"}, default ()
        Companion curves to add.

    Returns
    -------
    dict
        ``thresholds`` and ``mcc`` (the pooled curve), ``companions`` (name ->
        values on the same thresholds), ``fold_curves`` (DataArray dims
        ``fold, threshold``, or None), ``best`` (threshold, MCC), ``chosen``
        (per fold: threshold chosen on the other folds and that fold's own MCC
        there, or None), ``held_out`` (mean held-out MCC, or None), ``user``
        ((threshold, MCC) or None), ``label``.

    Examples
    --------
    >>> from foldcorr.analysis.thresholds import sweep
    >>> r = sweep([0, 0, 1, 1, 0, 1], [0.2, 0.6, 0.7, 0.9, 0.1, 0.4], folds=[1, 1, 1, 2, 2, 2])
    >>> d = threshold_data(r)
    >>> d["best"], d["chosen"]
    ((0.7, 0.7071067811865475), [(0.4, 0.5), (0.7, 0.5)])
    """
    for name in companions:
        if name not in COMPANIONS:
            raise OptionError(f"`companions` {name!r} is not one of {list(COMPANIONS)!r}")
    s = _pick(result, label)
    curve = s.figures(max_points=MAX_POINTS)
    chosen = None
    if s.crossfold is not None:
        chosen = [(float(t), float(m)) for t, m in
                  zip(s.crossfold["threshold"].values, s.crossfold["mcc"].values)]
    return {"label": s.label, "thresholds": curve[THRESHOLD].values,
            "mcc": curve["mcc"].values,
            "companions": {name: curve[name].values for name in companions},
            "fold_curves": s.fold_curves, "best": (s.best_threshold, s.best_mcc),
            "chosen": chosen, "held_out": s.crossfold_mcc,
            "user": None if s.at_threshold is None else (s.at_threshold, s.mcc_at)}


def threshold_plot(result: SweepResult, *, ax: Axes | None = None,
                   label: Hashable | None = None,
                   companions: Sequence[str] = ()) -> Axes | Figure:
    """Draw MCC against the threshold: pooled and per-fold curves, the optimum and the choices.

    Parameters
    ----------
    result : SweepResult
        The sweep to draw.
    ax : matplotlib.axes.Axes, optional
        Draw here and return it; without it, a new figure is returned.
    label, companions
        As in :func:`threshold_data`.

    Returns
    -------
    matplotlib.figure.Figure or matplotlib.axes.Axes

    Raises
    ------
    OptionError
        An unknown label or companion.
    MissingDependencyError
        When matplotlib is not installed.

    Examples
    --------
    >>> from foldcorr.analysis.thresholds import sweep
    >>> r = sweep([0, 1, 1, 0, 1, 0], [0.1, 0.8, 0.6, 0.3, 0.4, 0.5], folds=[1, 1, 1, 2, 2, 2])
    >>> threshold_plot(r).axes[0].get_ylabel()
    'MCC'
    """
    d = threshold_data(result, label=label, companions=companions)
    ax, fig = axes_for(ax, 10.0, 5.0)
    x = d["thresholds"]
    for name, values in d["companions"].items():
        ax.plot(x, values, color="#8A8A8A", linestyle=COMPANIONS[name], linewidth=1.1,
                label=name, drawstyle="steps-pre")
    folds = d["fold_curves"]
    if folds is not None:
        for j, fold in enumerate(folds.coords["fold"].values):
            ax.plot(folds[THRESHOLD].values, folds.values[j], color=PALETTE["teal"],
                    linewidth=0.9, alpha=0.55, drawstyle="steps-pre",
                    label="MCC of each fold alone" if j == 0 else None)
    # a threshold in (a, b] acts as b
    ax.plot(x, d["mcc"], color=PALETTE["ink"], linewidth=2.4, drawstyle="steps-pre",
            label="MCC, all samples")
    best_t, best_m = d["best"]
    ax.plot([best_t], [best_m], "*", color=PALETTE["plum"], markersize=17,
            markeredgecolor="white", zorder=5,
            label=f"in-sample optimum {best_t:.3g}: MCC {best_m:.3f} (optimistic)")
    if d["chosen"] is not None:
        ts = np.array([t for t, _ in d["chosen"]])
        ax.plot(ts, [m for _, m in d["chosen"]], "v", color=PALETTE["ochre"], markersize=9,
                markeredgecolor=PALETTE["ink"], markeredgewidth=0.5, zorder=4,
                label="threshold chosen on the other folds, on its fold's curve")
        span = (np.nanmin(ts), np.nanmax(ts)) if np.isfinite(ts).any() else (best_t, best_t)
        width = max(span[1] - span[0], 0.08 * (x.max() - x.min() if x.size else 1.0))
        mid = (span[0] + span[1]) / 2
        ax.hlines(d["held_out"], mid - width / 2, mid + width / 2, color=PALETTE["ochre"],
                  linewidth=4, zorder=3, label=f"mean held-out MCC {d['held_out']:.3f} "
                                               f"(optimism {best_m - d['held_out']:.3f})")
        ax.text(mid + width / 2, d["held_out"], f" held-out {d['held_out']:.3f}",
                va="center", fontsize=8, color=PALETTE["ink"])
    if d["user"] is not None:
        ax.plot([d["user"][0]], [d["user"][1]], "D", color="white",
                markeredgecolor=PALETTE["ink"], markersize=8, zorder=5,
                label=f"your threshold {d['user'][0]:g}: MCC {d['user'][1]:.3f}")
    ax.axhline(0.0, color=PALETTE["mist"], linewidth=1.0, zorder=0)
    ax.set_xlabel("threshold (predict positive when score >= threshold)")
    ax.set_ylabel("MCC")
    low = min(-0.05, float(np.nanmin(d["mcc"])) - 0.05 if x.size else -0.05)
    ax.set_ylim(low, 1.05)
    name = "binary sweep" if d["label"] is None else f"label {plot_text(d['label'])}"
    ax.set_title(f"MCC by threshold, {name}", loc="left")
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, frameon=False)
    return finish(ax, fig)

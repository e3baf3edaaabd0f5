"""The loss budget: each class's share of the shortfall 1 - R_K, ranked, with its two parts.

A ranked dot plot, one row per class (or label), largest share first. Each row
is a stem from 0: a teal disc where the class's drag ends, and an ochre bar
from there to an open diamond at its whole share (drag plus its share of the
marginal mismatch). The shares of every class add up to 1 - R_K exactly
(``docs/decomposition.md``); a note under the rows says how much the classes not
drawn carry, and the running total of the rows drawn is printed on the right.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from foldcorr.figures import BUDGETED, MULTILABEL, POOLED
from foldcorr.report.plots.canvas import PALETTE, axes_for, finish, short

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from foldcorr.evaluation import Evaluation

__all__ = ["loss_budget_data", "loss_budget_plot"]

_PLURAL = {"class": "classes", "label": "labels"}


def _names(values) -> list:
    return [v.item() if hasattr(v, "item") else v for v in values]


def loss_budget_data(ev, *, max_classes: int = 20) -> dict:
    """The rows of the loss budget: classes by shortfall share, with drag and mismatch share.

    Parameters
    ----------
    ev : Evaluation
        The evaluation to draw.
    max_classes : int, default 20
        Rows drawn (largest share first); the others are counted in ``rest``.

    Returns
    -------
    dict
        ``labels``, ``drag``, ``mismatch`` (each class's share of the marginal
        mismatch; 0 for a multilabel evaluation, whose macro MCC has none) and
        ``share`` (their sum) of the rows drawn; ``shortfall`` (1 minus the
        budgeted figure: R_K, or macro MCC for multilabel), ``rest_count`` and
        ``rest_share`` (the classes not drawn), ``name`` and ``unit``.
        ``sum(share) + rest_share == shortfall``.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(confusion_tensor([[5, 1, 0], [2, 6, 0], [0, 3, 3]], ["a", "b", "c"]))
    >>> data = loss_budget_data(ev, max_classes=2)
    >>> data["labels"], data["rest_count"]
    (['b', 'a'], 1)
    >>> round(sum(data["share"]) + data["rest_share"], 12) == round(data["shortfall"], 12)
    True
    """
    rows = ev.ranked()
    drag = np.nan_to_num(np.asarray(rows["drag"].values, dtype=float))
    mismatch = (np.zeros_like(drag) if ev.kind == MULTILABEL
                else np.nan_to_num(np.asarray(rows["mismatch_share"].values, dtype=float)))
    share = drag + mismatch
    keep = min(max_classes, share.size)
    key = BUDGETED[ev.kind]
    name = next(f.headline or f.label for f in ev.figures(POOLED) if f.key == key)
    if ev.kind == MULTILABEL:
        name = "macro MCC"
    return {"labels": _names(rows.coords[ev.row_scope].values[:keep]),
            "drag": drag[:keep].tolist(), "mismatch": mismatch[:keep].tolist(),
            "share": share[:keep].tolist(), "shortfall": 1.0 - float(ev.figure(key)),
            "rest_count": int(share.size - keep), "rest_share": float(share[keep:].sum()),
            "name": name, "unit": ev.row_scope}


def loss_budget_plot(ev: Evaluation, *, ax: Axes | None = None,
                     max_classes: int = 20) -> Axes | Figure:
    """Draw the loss budget: a ranked dot plot of each class's share of 1 - R_K.

    Parameters
    ----------
    ev : Evaluation
        The evaluation to draw.
    ax : matplotlib.axes.Axes, optional
        Draw here and return it; without it, a new figure is returned.
    max_classes : int, default 20
        As in :func:`loss_budget_data`.

    Returns
    -------
    matplotlib.figure.Figure or matplotlib.axes.Axes
        The new figure (it shows itself inline in a notebook), or ``ax``.

    Raises
    ------
    MissingDependencyError
        When matplotlib is not installed (the ``plot`` extra).

    Notes
    -----
    :math:`1 - R_K = \\sum_k (d_k + m_k)` with :math:`d_k = w_k(1 - \\mathrm{MCC}_k)`
    the drag and :math:`m_k` the class's share of the marginal mismatch
    (``docs/decomposition.md``); each row shows :math:`d_k` and :math:`d_k + m_k`.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(confusion_tensor([[5, 1], [2, 6]], ["a", "b"]))
    >>> loss_budget_plot(ev).axes[0].get_title()
    'Who carries the shortfall 1 − R_K = 0.423'
    """
    data = loss_budget_data(ev, max_classes=max_classes)
    n = len(data["labels"])
    ax, fig = axes_for(ax, 9.0, max(3.2, 1.5 + 0.32 * n))
    y = np.arange(n)
    drag, share = np.asarray(data["drag"]), np.asarray(data["share"])
    ax.hlines(y, 0.0, drag, color=PALETTE["teal"], linewidth=1.0)
    ax.hlines(y, drag, share, color=PALETTE["ochre"], linewidth=5.0, alpha=0.85,
              label="its share of the marginal mismatch")
    ax.plot(drag, y, "o", color=PALETTE["teal"], markersize=6, label="drag: w (1 − MCC)")
    ax.plot(share, y, "D", markerfacecolor="white", markeredgecolor=PALETTE["ink"],
            markersize=6, label="whole share (drag + mismatch share)")
    total, running = data["shortfall"], np.cumsum(share)
    right = max(float(share.max()) if n else 0.0, 1e-9) * 1.32
    for i in range(n):
        ax.text(share[i] + 0.02 * right, i, f"{share[i]:.3f}", va="center", fontsize=8)
        if total > 0:
            ax.text(right, i, f"{running[i] / total:.0%}", va="center", ha="right", fontsize=8,
                    color=PALETTE["ink"], alpha=0.7)
    ax.set_yticks(y, [short(v) for v in data["labels"]])
    ax.set_ylim(n - 0.5, -0.9)
    ax.set_xlim(0.0, right)
    ax.text(right, -0.75, "running total", ha="right", va="center", fontsize=8, style="italic")
    name, unit = data["name"], data["unit"]
    note = ""
    if data["rest_count"]:
        noun = unit if data["rest_count"] == 1 else _PLURAL[unit]
        note = f"; {data['rest_count']} {noun} not drawn carry {data['rest_share']:.3f}"
    ax.set_xlabel(f"share of 1 − {name} (all {_PLURAL[unit]} together: {total:.3f}){note}")
    ax.set_title(f"Who carries the shortfall 1 − {name} = {total:.3f}")
    ax.grid(axis="x", color=PALETTE["mist"], linewidth=0.6)
    ax.set_axisbelow(True)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.14), ncols=3, fontsize=8,
              frameon=False)
    return finish(ax, fig)

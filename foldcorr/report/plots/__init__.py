"""Plots of results (matplotlib, optional: the ``plot`` extra), one module per plot family.

=================  ==========================================  ===================
module             what it draws                               result
=================  ==========================================  ===================
``budget``         each class's share of 1 - R_K, ranked        Evaluation
``confusion``      where the errors go (grouped > 100 classes)  Evaluation
``folds``          R_K per fold                                 Evaluation
``class_fold``     per-class MCC, classes x folds               Evaluation
``models``         R_K per model; B - A of two models           ManyComparison,
                                                                Comparison
``thresholds``     MCC by threshold, per fold                   SweepResult
``canvas``         figure set-up, palette, inline display,
                   saving
``files``          every plot of a result; ``--plot DIR``
=================  ==========================================  ===================

Every plot function takes ``ax=`` (it draws there and returns the Axes) and,
without it, returns a new figure that shows itself inline in a notebook.
:func:`plot` is what the ``plot(kind)`` method of each result calls. Nothing
here computes a metric: the values come from the result objects (see
``docs/plots.md``).
"""

from __future__ import annotations

from foldcorr.errors import OptionError
from foldcorr.report.plots.budget import loss_budget_data, loss_budget_plot
from foldcorr.report.plots.canvas import DPI, PALETTE, figure_png, figure_svg
from foldcorr.report.plots.class_fold import class_fold_data, class_fold_figures, class_fold_plot
from foldcorr.report.plots.confusion import confusion_data, confusion_plot, group_classes
from foldcorr.report.plots.files import figures, save_plots
from foldcorr.report.plots.folds import fold_data, fold_plot
from foldcorr.report.plots.models import difference_data, difference_plot, models_data, models_plot
from foldcorr.report.plots.thresholds import threshold_data, threshold_plot

__all__ = [
    "PLOTS", "plot", "DPI", "PALETTE", "figure_png", "figure_svg", "figures", "save_plots",
    "loss_budget_data", "loss_budget_plot", "confusion_data", "confusion_plot", "group_classes",
    "fold_data", "fold_plot", "class_fold_figures", "class_fold_data", "class_fold_plot",
    "models_data", "models_plot", "difference_data", "difference_plot",
    "threshold_data", "threshold_plot",
]

#: Result class name -> {kind: plot function}: what ``result.plot(kind)`` can draw.
PLOTS = {
    "Evaluation": {"loss_budget": loss_budget_plot, "confusion": confusion_plot,
                   "folds": fold_plot, "class_fold": class_fold_plot},
    "Comparison": {"difference": difference_plot},
    "ManyComparison": {"models": models_plot},
    "SweepResult": {"threshold": threshold_plot},
}


def plot(result, kind: str, ax=None, **options):
    """Draw one plot of a result: on ``ax`` (returned), or as a new figure (returned).

    Parameters
    ----------
    result : Evaluation, Comparison, ManyComparison or SweepResult
        The result to draw.
    kind : str
        A plot of :data:`PLOTS` for the result's type.
    ax : matplotlib.axes.Axes, optional
        Where to draw.
    **options
        Passed to the plot function (for example ``max_classes``).

    Raises
    ------
    OptionError
        On a kind the result does not have.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(confusion_tensor([[5, 1], [2, 6]], ["a", "b"]))
    >>> type(plot(ev, "confusion")).__name__
    'ShownFigure'
    """
    table = PLOTS.get(type(result).__name__, {})
    if kind not in table:
        raise OptionError(f"`kind` {kind!r} is not a plot of {type(result).__name__}; "
                          f"choose from {list(table)!r}")
    return table[kind](result, ax=ax, **options)

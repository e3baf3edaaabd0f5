"""Every plot of a result, by file name, and writing them into a folder (``--plot DIR``).

An evaluation gives ``loss_budget``, ``confusion`` (multiclass), ``folds`` and
``class_fold`` (multiclass, with folds); a sweep gives one ``sweep...`` plot per
label; a two-model comparison ``difference``; a many-model comparison
``models``. Each file is written whole or not at all.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import re
from pathlib import Path

from foldcorr.errors import InvalidInputError, check_choice
from foldcorr.figures import MULTICLASS
from foldcorr.report.plots.budget import loss_budget_plot
from foldcorr.report.plots.canvas import save_figure
from foldcorr.report.plots.class_fold import class_fold_plot
from foldcorr.report.plots.confusion import confusion_plot
from foldcorr.report.plots.folds import fold_plot
from foldcorr.report.plots.models import difference_plot, models_plot
from foldcorr.report.plots.thresholds import threshold_plot

if TYPE_CHECKING:
    import os
    from collections.abc import Sequence

__all__ = ["figures", "save_plots", "FILE_FORMATS"]

#: File formats ``save_plots`` writes.
FILE_FORMATS = ("png", "svg")


def _sweep_file(label, i: int) -> str:
    if label is None:
        return "sweep"
    safe = re.sub(r"[^A-Za-z0-9._-]+", "_", str(label)).strip("._") or f"label{i}"
    return f"sweep_{i:03d}_{safe}"


def figures(result, *, max_classes: int = 100) -> dict:
    """Every plot that applies to ``result``, by file name (without suffix).

    Parameters
    ----------
    result : Evaluation, SweepResult, Comparison or ManyComparison
        The result to draw.
    max_classes : int, default 100
        Classes beyond which the confusion heatmap groups them.

    Returns
    -------
    dict of str to matplotlib.figure.Figure

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> sorted(figures(evaluate(confusion_tensor([[5, 1], [2, 6]], ["a", "b"]))))
    ['confusion', 'loss_budget']
    """
    kind = type(result).__name__
    if kind == "SweepResult":
        return {_sweep_file(s.label, i): threshold_plot(result, label=s.label)
                for i, s in enumerate(result.labels)}
    if kind == "Comparison":
        return {"difference": difference_plot(result)}
    if kind == "ManyComparison":
        return {"models": models_plot(result)}
    out = {"loss_budget": loss_budget_plot(result)}
    if result.kind == MULTICLASS:  # a multilabel tensor is one 2 x 2 matrix per label
        out["confusion"] = confusion_plot(result, max_classes=max_classes)
    if result.folds is not None:
        out["folds"] = fold_plot(result)
        if result.kind == MULTICLASS:
            out["class_fold"] = class_fold_plot(result)
    return out


def save_plots(result: object, folder: str | os.PathLike[str], *,
               formats: Sequence[str] = FILE_FORMATS, max_classes: int = 100) -> list[Path]:
    """Write every plot of :func:`figures` into ``folder``, one file per format.

    Parameters
    ----------
    result : Evaluation, SweepResult, Comparison or ManyComparison
        The result to draw.
    folder : str or path
        Output folder, created if needed. Files are named after the plots
        (``loss_budget.png``, ``confusion.svg``, ...); each is written whole
        or not at all.
    formats : sequence of {"png", "svg"}, default ("png", "svg")
        File formats.
    max_classes : int, default 100
        As in :func:`figures`.

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

    for fmt in formats:
        check_choice("formats", fmt, FILE_FORMATS)
    target = Path(folder)
    try:
        target.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InvalidInputError(f"cannot create the plot folder {str(target)!r}: "
                                f"{exc.strerror}") from None
    written = []
    for name, fig in figures(result, max_classes=max_classes).items():
        for fmt in formats:
            path = target / f"{name}.{fmt}"
            with atomic_target(path, suffix=f".{fmt}") as tmp:
                save_figure(fig, tmp, fmt)
            written.append(path)
    return written

"""What every plot shares: the optional import, a Figure that shows itself, the palette, saving.

Figures are made without pyplot on the Agg canvas, so nothing here touches
global plotting state or needs a display. A figure made that way has no rich
display of its own in a notebook; :func:`new_figure` returns an instance of a
small Figure subclass with ``_repr_png_`` and ``_repr_svg_``, so a plot
returned by a function shows inline in a fresh kernel, pyplot never imported.
matplotlib is optional (the ``plot`` extra): :func:`matplotlib_module` raises
one clear :class:`~foldcorr.errors.MissingDependencyError` when it is missing.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import functools
import io

from foldcorr.errors import require
from foldcorr.report.tables import plot_text

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = ["DPI", "MAX_LABEL", "PALETTE", "KILN", "SPLIT", "matplotlib_module", "new_figure",
           "axes_for", "finish", "short", "figure_png", "figure_svg", "save_figure"]

#: Resolution of PNG files and inline images; pixel size = figure size in inches x DPI.
DPI = 100

#: Labels longer than this are shortened with an ellipsis on axes.
MAX_LABEL = 22

#: The project's named colours. Chosen to stay apart in the common colour-vision
#: deficiencies (checked by eye in a deuteranopia simulation: ink, teal, ochre and
#: clay differ in lightness as well as hue); shapes and printed values carry every
#: meaning too, so colour is never needed to read a plot.
PALETTE = {
    "ink": "#23313F",     # text-dark slate: totals, the pooled curve
    "teal": "#17806D",    # drag, a model's own value
    "ochre": "#C98A1B",   # mismatch share, cross-fold choices
    "clay": "#B4483C",    # worse, below zero
    "plum": "#6B3A6B",    # the in-sample optimum
    "mist": "#D9DEE3",    # bands and guides
    "paper": "#FBF8F1",   # empty cells
}

#: The sequential scale of the heatmaps ("kiln"): paper through sand and terracotta
#: to aubergine, monotone in lightness so it also reads in grey scale.
KILN = ("#FBF8F1", "#F0D9A8", "#DDA15E", "#B4593F", "#6E2B4F", "#2E1530")

#: The two-sided scale of MCC in [-1, 1] ("split"): clay below 0, paper at 0, teal to
#: deep slate above 0.
SPLIT = ("#8E2F25", "#D98C7A", "#FBF8F1", "#8CC5B5", "#17806D", "#123B36")

PURPOSE = "drawing plots"


def matplotlib_module(name: str = "matplotlib"):
    """Import a matplotlib module, or raise the one message that names the ``plot`` extra.

    Examples
    --------
    >>> matplotlib_module("matplotlib.colors").__name__
    'matplotlib.colors'
    """
    require("matplotlib", extra="plot", purpose=PURPOSE)
    return require(name, extra="plot", purpose=PURPOSE)


@functools.cache
def _figure_class():
    figure = matplotlib_module("matplotlib.figure")

    class ShownFigure(figure.Figure):
        """A Figure that a notebook shows inline as PNG or SVG, without pyplot."""

        def _repr_png_(self) -> bytes:
            return figure_png(self)

        def _repr_svg_(self) -> str:
            return figure_svg(self)

    return ShownFigure


def new_figure(width: float, height: float):
    """An empty figure on the Agg canvas that displays itself in a notebook.

    Examples
    --------
    >>> fig = new_figure(4, 3)
    >>> fig._repr_png_()[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
    True
    """
    agg = matplotlib_module("matplotlib.backends.backend_agg")
    fig = _figure_class()(figsize=(width, height), dpi=DPI, layout="constrained")
    agg.FigureCanvasAgg(fig)
    return fig


def axes_for(ax, width: float, height: float):
    """``(ax, fig)``: the caller's Axes and None, or a new figure's only Axes and that figure.

    Examples
    --------
    >>> ax, fig = axes_for(None, 4, 3)
    >>> ax.figure is fig
    True
    """
    if ax is not None:
        return ax, None
    fig = new_figure(width, height)
    return fig.add_subplot(), fig


def finish(ax, fig):
    """What a plot function returns: the new figure, or the caller's Axes when one was given.

    Examples
    --------
    >>> ax, fig = axes_for(None, 4, 3)
    >>> finish(ax, fig) is fig, finish(ax, None) is ax
    (True, True)
    """
    return ax if fig is None else fig


def short(label) -> str:
    """A label as literal plot text, shortened to :data:`MAX_LABEL` characters.

    Examples
    --------
    >>> short("a" * 30)
    'aaaaaaaaaaaaaaaaaaaaa…'
    """
    text = str(label)
    text = text if len(text) <= MAX_LABEL else text[: MAX_LABEL - 1] + "\u2026"
    return plot_text(text)


def save_figure(fig, target, fmt: str) -> None:
    """Write a figure as PNG or SVG; the same figure gives the same bytes on every run.

    Examples
    --------
    >>> buffer = io.BytesIO()
    >>> save_figure(new_figure(2, 2), buffer, "png")
    >>> buffer.getvalue()[:4]
    b'\\x89PNG'
    """
    mpl = matplotlib_module()
    # fixed ids and no timestamp, so the same evaluation gives the same SVG bytes
    with mpl.rc_context({"svg.hashsalt": "foldcorr"}):
        fig.savefig(target, format=fmt, dpi=DPI,
                    metadata={"Date": None} if fmt == "svg" else {"Software": None})


def figure_png(fig) -> bytes:
    """A figure as PNG bytes.

    Examples
    --------
    >>> figure_png(new_figure(2, 2))[1:4]
    b'PNG'
    """
    buffer = io.BytesIO()
    save_figure(fig, buffer, "png")
    return buffer.getvalue()


def figure_svg(fig: Figure) -> str:
    """A figure as SVG text, e.g. to embed inline in an HTML page.

    The text is the same for the same figure on every run (fixed ids, no date).

    Examples
    --------
    >>> svg = figure_svg(new_figure(2, 2))
    >>> svg.lstrip().startswith("<?xml"), "</svg>" in svg
    (True, True)
    """
    buffer = io.BytesIO()
    save_figure(fig, buffer, "svg")
    return buffer.getvalue().decode("utf-8")

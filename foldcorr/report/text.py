"""Terminal and plain-text rendering with rich.

Colour is decided once, by the rich Console: none when output is not a
terminal, when ``NO_COLOR`` is set, or when writing to a file. Colour only
repeats what the numbers already say (the scale is
:func:`foldcorr.report.colours.mcc_colour`).

Text fits its width: the terminal's, else ``COLUMNS``, else
:data:`DEFAULT_WIDTH`. A table too wide for it loses columns by
:attr:`~foldcorr.report.tables.Column.priority` (lowest first; the note says
which), never continues in a second table. Each table ends with a one-line
legend of its column words (:func:`foldcorr.report.tables.legend`).
"""

from __future__ import annotations

import io
import os
import sys

from rich import box
from rich.console import Console, Group
from rich.table import Table as RichTable
from rich.text import Text

from foldcorr.report.colours import mcc_colour
from foldcorr.report.tables import Report, Table, legend, score_report

__all__ = ["render_rich", "render_text", "text_width", "fit_columns", "DEFAULT_WIDTH"]

#: Width of text when neither the terminal nor ``COLUMNS`` gives one.
DEFAULT_WIDTH = 100


def text_width(stream=None) -> int:
    """The width text is laid out for: ``COLUMNS`` when set, else the terminal's, else 100.

    Examples
    --------
    >>> saved = os.environ.pop("COLUMNS", None)
    >>> os.environ["COLUMNS"] = "72"; text_width(io.StringIO())
    72
    >>> del os.environ["COLUMNS"]; text_width(io.StringIO())
    100
    >>> if saved is not None: os.environ["COLUMNS"] = saved
    """
    given = os.environ.get("COLUMNS", "")
    if given.strip().isdigit() and int(given) > 0:
        return int(given)
    stream = sys.stdout if stream is None else stream
    try:
        if stream.isatty():
            return os.get_terminal_size(stream.fileno()).columns
    except (AttributeError, OSError, ValueError):
        pass
    return DEFAULT_WIDTH


def _rich_table(table: Table) -> RichTable:
    out = RichTable(box=box.SIMPLE_HEAD, pad_edge=False, show_edge=False)
    for col in table.columns:
        out.add_column(col.title, justify="right" if col.numeric else "left",
                       no_wrap=col.kind != "text", overflow="fold")
    for raw, cells in zip(table.rows, table.cells()):
        styled = [
            Text(cell, style=_colour(value) if col.kind == "correlation" else "")
            for value, cell, col in zip(raw, cells, table.columns)
        ]
        out.add_row(*styled)
    return out


def _colour(value) -> str:
    try:
        return mcc_colour(value)
    except (TypeError, ValueError):
        return ""


#: Columns of this priority or more are dropped only when wrapping their text is not enough.
ESSENTIAL = 9


def fit_columns(table: Table, fits, *, among=None, below: int | None = None) -> tuple[int, ...]:
    """The columns of ``table`` kept so that ``fits(kept)`` holds: lowest priority dropped first.

    ``among`` limits the columns to start from (default: all); ``below``
    drops only columns of a lower priority, even if ``fits`` still fails. The
    first column (the name of the row) always stays; among equal priorities
    the rightmost goes first.

    Examples
    --------
    >>> from foldcorr.report.tables import Column
    >>> t = Table("t", (Column("class", "label"), Column("MCC"), Column("w/o class")), ())
    >>> fit_columns(t, lambda kept: len(kept) <= 2)
    (0, 1)
    >>> fit_columns(t, lambda kept: len(kept) <= 1, below=9)
    (0, 1)
    """
    kept = list(range(len(table.columns)) if among is None else among)
    order = sorted(kept[1:], key=lambda i: (table.columns[i].priority, -i))
    if below is not None:
        order = [i for i in order if table.columns[i].priority < below]
    while order and not fits(tuple(kept)):
        kept.remove(order.pop(0))
    return tuple(kept)


def _subset(table: Table, keep) -> Table:
    return Table(table.title, tuple(table.columns[i] for i in keep),
                 tuple(tuple(row[i] for i in keep) for row in table.rows), table.note)


class _Fitted:
    """A report table laid out for the width at hand, then its note and legend."""

    def __init__(self, table: Table):
        self.table = table

    def __rich_console__(self, console, options):
        from rich.measure import Measurement

        table = self.table
        wide = options.update(max_width=1 << 20)  # natural widths, not clamped to the console

        def measure(keep):
            return Measurement.get(console, wide, _rich_table(_subset(table, keep)))

        # drop the less important columns first; only then wrap text columns (numbers and
        # names never wrap), and drop essential columns only if even that is not enough
        keep = fit_columns(table, lambda k: measure(k).maximum <= options.max_width,
                           below=ESSENTIAL)
        keep = fit_columns(table, lambda k: measure(k).minimum <= options.max_width,
                           among=keep)
        shown = _subset(table, keep)
        yield Text(table.title, style="bold")
        yield _rich_table(shown)
        dropped = [c.title for i, c in enumerate(table.columns) if i not in keep]
        notes = [table.note] if table.note else []
        if dropped:
            notes.append(f"not shown at this width: {', '.join(dropped)} (all are in JSON)")
        for note in notes:
            yield Text(note, style="dim")
        words = legend(shown.columns)
        if words:
            yield Text(words, style="dim italic")


def render_rich(source, *, top: int | None = 20) -> Group:
    """A rich renderable for a :class:`Report` or an evaluation.

    Examples
    --------
    >>> from rich.console import Console
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> console = Console(file=io.StringIO(), width=100, color_system=None)
    >>> console.print(render_rich(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))))
    >>> "R_K" in console.file.getvalue()
    True
    """
    report = source if isinstance(source, Report) else score_report(source, top=top)
    facts = Text()
    facts.append(report.title, style="bold")
    for key, value in report.facts:
        facts.append(f"  {key}: ", style="dim")
        facts.append(value)
    parts = [facts]
    for table in report.tables:
        parts.extend([Text(""), _Fitted(table)])
    if report.warnings:
        parts.append(Text(""))
        parts.append(Text("Warnings", style="bold"))
        parts.extend(Text(f"- {w}", style="yellow") for w in report.warnings)
    return Group(*parts)


def render_text(report: Report, *, width: int | None = None) -> str:
    """Plain text (no colour codes) of a report, at ``width`` (default :func:`text_width`).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> text = render_text(score_report(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))))
    >>> "\\x1b[" in text, "Classes by shortfall share" in text
    (False, True)
    """
    console = Console(file=io.StringIO(), width=width or text_width(), color_system=None,
                      force_terminal=False, no_color=True)
    console.print(render_rich(report))
    return "\n".join(line.rstrip() for line in console.file.getvalue().splitlines()) + "\n"

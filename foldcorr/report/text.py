"""Terminal and plain-text rendering with rich.

Colour is decided once, by the rich Console: none when output is not a
terminal, when ``NO_COLOR`` is set, or when writing to a file. Colour only
repeats what the numbers already say.
"""

from __future__ import annotations

import io

from rich import box
from rich.console import Console, Group
from rich.table import Table as RichTable
from rich.text import Text

from foldcorr.report.tables import Report, Table, score_report

__all__ = ["render_rich", "render_text", "correlation_style", "PLAIN_WIDTH"]

#: Width used when the output is not a terminal, so CI logs stay stable.
PLAIN_WIDTH = 120

#: Lower edges of the colour bands for correlations, highest first.
BANDS = ((0.7, "bold green"), (0.4, "yellow"), (float("-inf"), "bold red"))


def correlation_style(value) -> str:
    """The style of a correlation's colour band ("" for undefined values).

    Examples
    --------
    >>> correlation_style(0.9), correlation_style(0.5), correlation_style(-0.1)
    ('bold green', 'yellow', 'bold red')
    """
    if value is None or value != value:
        return ""
    return next(style for edge, style in BANDS if value >= edge)


def _rich_table(table: Table) -> RichTable:
    out = RichTable(box=box.SIMPLE_HEAD, pad_edge=False, show_edge=False)
    for col in table.columns:
        out.add_column(col.title, justify="right" if col.numeric else "left",
                       no_wrap=col.kind != "text", overflow="fold")
    for raw, cells in zip(table.rows, table.cells()):
        styled = [
            Text(cell, style=correlation_style(value) if col.kind == "correlation" else "")
            for value, cell, col in zip(raw, cells, table.columns)
        ]
        out.add_row(*styled)
    return out


class _Fitted:
    """A report table laid out for the width at hand: columns that do not fit go into
    continuation tables that repeat the first (label) column, instead of being squeezed."""

    def __init__(self, table: Table):
        self.table = table

    def __rich_console__(self, console, options):
        from rich.measure import Measurement

        table = self.table
        full = _rich_table(table)
        wide = options.update(max_width=1 << 20)  # natural widths, not clamped to the console
        if len(table.columns) <= 2 or Measurement.get(console, wide, full).maximum <= options.max_width:
            yield Text(table.title, style="bold")
            yield full
            return
        def width(keep) -> int:
            piece = Table("", tuple(table.columns[i] for i in keep),
                          tuple(tuple(row[i] for i in keep) for row in table.rows))
            return Measurement.get(console, wide, _rich_table(piece)).maximum
        parts, current = [], []
        for i in range(1, len(table.columns)):
            if current and width((0, *current, i)) > options.max_width:
                parts.append(current)
                current = []
            current.append(i)
        parts.append(current)
        for n, part in enumerate(parts):
            keep = (0, *part)
            title = table.title if n == 0 else f"{table.title} (continued)"
            piece = Table(title, tuple(table.columns[i] for i in keep),
                          tuple(tuple(row[i] for i in keep) for row in table.rows))
            if n:
                yield Text("")
            yield Text(title, style="bold")
            yield _rich_table(piece)


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
        if table.note:
            parts.append(Text(table.note, style="dim"))
    if report.warnings:
        parts.append(Text(""))
        parts.append(Text("Warnings", style="bold"))
        parts.extend(Text(f"- {w}", style="yellow") for w in report.warnings)
    return Group(*parts)


def render_text(report: Report, *, width: int = PLAIN_WIDTH) -> str:
    """Plain text (no colour codes) of a report, at a fixed width.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> text = render_text(score_report(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))))
    >>> "\\x1b[" in text, "Classes by shortfall share" in text
    (False, True)
    """
    console = Console(file=io.StringIO(), width=width, color_system=None,
                      force_terminal=False, no_color=True)
    console.print(render_rich(report))
    return "\n".join(line.rstrip() for line in console.file.getvalue().splitlines()) + "\n"

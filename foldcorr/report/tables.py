"""Report content as plain tables, shared by the text and Markdown renderers.

A :class:`Table` is data: a title, columns that know how to format their cells,
and rows of raw values. Renderers lay it out; nothing here computes a metric.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from foldcorr.decomposition import flag_words
from foldcorr.evaluation import Evaluation
from foldcorr.figures import MULTICLASS, MULTILABEL, PER_FOLD, POOLED, Figure
from foldcorr.report.sections import hooks

__all__ = ["Column", "Table", "Report", "score_report", "format_value", "format_p", "figure_column",
           "figure_cell", "COLUMN_KIND", "WORDING", "plot_text"]


@dataclass(frozen=True)
class Column:
    """One column of a report table.

    Attributes
    ----------
    title : str
        Header text.
    kind : str
        ``"label"`` (left aligned text), ``"count"``, ``"metric"`` (three
        decimals), ``"correlation"`` (a metric shown in colour bands on a
        terminal) or ``"text"``.
    """

    title: str
    kind: str = "metric"

    @property
    def numeric(self) -> bool:
        """Whether the column is right-aligned."""
        return self.kind in ("count", "metric", "correlation")


@dataclass(frozen=True)
class Table:
    """A titled table of raw values."""

    title: str
    columns: tuple[Column, ...]
    rows: tuple[tuple, ...]
    note: str = ""

    def cells(self) -> list[list[str]]:
        """Every row formatted as text.

        Examples
        --------
        >>> Table("t", (Column("x", "metric"),), ((0.5,),)).cells()
        [['0.500']]
        """
        return [[format_value(v, c.kind) for v, c in zip(row, self.columns)] for row in self.rows]


@dataclass(frozen=True)
class Report:
    """A report: a title, key-value facts, tables and warnings, in order."""

    title: str
    facts: tuple[tuple[str, str], ...]
    tables: tuple[Table, ...]
    warnings: tuple[str, ...] = field(default_factory=tuple)


def format_p(p) -> str:
    """Format a p-value: three significant digits, scientific below 0.001, ``n/a`` if undefined.

    Examples
    --------
    >>> format_p(0.04321), format_p(0.00002), format_p(float("nan"))
    ('0.0432', '2.0e-05', 'n/a')
    """
    p = float(p)
    return "n/a" if p != p else (f"{p:.3g}" if p >= 0.001 else f"{p:.1e}")


def format_value(value, kind: str) -> str:
    """Format one cell; undefined values show as ``n/a``.

    Examples
    --------
    >>> format_value(0.12345, "metric"), format_value(1200, "count"), format_value(None, "metric")
    ('0.123', '1200', 'n/a')
    >>> format_value(12.5, "count")
    '12.5'
    """
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "n/a"
    if kind in ("metric", "correlation"):
        return f"{value:.3f}"
    if kind == "count":
        number = float(value)
        return f"{int(number)}" if number.is_integer() else f"{number:.1f}"
    return str(value)


def _py(value):
    return value.item() if hasattr(value, "item") else value


#: Column kind of each figure style (:data:`foldcorr.figures.STYLES`).
COLUMN_KIND = {"correlation": "correlation", "metric": "metric", "count": "count",
               "confusion": "text", "flags": "text"}

#: The words of a report that depend on the tensor kind (the figures come from the registry).
WORDING = {
    MULTICLASS: {"title": "foldcorr score", "summary": "Pooled over all samples",
                 "rows": "Classes by shortfall share", "unit": "classes", "note": ""},
    MULTILABEL: {"title": "foldcorr score (multilabel)", "summary": "Averages over labels",
                 "rows": "Labels by cost", "unit": "labels",
                 "note": "cost = (1 - MCC) x support: the labels that cost the most come first"},
}


def figure_column(figure: Figure) -> Column:
    """The report column of a registry figure.

    Examples
    --------
    >>> from foldcorr.figures import FIGURES
    >>> figure_column(FIGURES[1])
    Column(title='R_K', kind='correlation')
    """
    return Column(figure.label, COLUMN_KIND[figure.style])


def figure_cell(table, i: int, figure: Figure):
    """The raw cell of one figure in row ``i`` of a per-fold, per-class or per-label dataset.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
    >>> [figure_cell(ev.per_class, 0, f) for f in ev.figures("class")][:2]
    [8, 7]
    """
    if figure.style == "confusion":
        count = _py(table[f"{figure.key}_count"].values[i])
        if count == 0:
            return ""
        return f"{_py(table[figure.key].values[i])} ({format_value(count, 'count')})"
    value = _py(table[figure.key].values[i])
    if figure.style == "flags":
        return ", ".join(flag_words(value))
    if figure.style != "count":
        return float(value)
    return round(value, 1) if isinstance(value, float) else value


def _extra_columns(ev, hook: str, columns: tuple, rows: list, keys: list, *, figures,
                   before_last: bool):
    """Add the columns of a section hook: ``(column, values by row key[, after figure key])``.

    A column goes right after the figure it names, else before the last column
    (``before_last``) or at the end.
    """
    slots = ["", *(f.key for f in figures)]
    for more in hooks(ev, hook):
        for column, by_key, *after in more(ev):
            if after and after[0] in slots:
                at = slots.index(after[0]) + 1
            else:
                at = len(columns) - 1 if before_last else len(columns)
            columns = (*columns[:at], column, *columns[at:])
            slots.insert(at, "")
            rows = [(*row[:at], by_key.get(key), *row[at:]) for row, key in zip(rows, keys)]
    return columns, rows


def summary_table(ev: Evaluation) -> Table:
    """Pooled figures, one row per figure (counts are headline facts instead)."""
    figures = [f for f in ev.figures(POOLED) if f.style != "count"]
    kind = "correlation" if all(f.style == "correlation" for f in figures) else "metric"
    notes: dict[str, str] = {}
    for more in hooks(ev, "summary_notes"):
        notes.update(more(ev))
    columns = (Column("figure", "label"), Column("value", kind))
    if notes:
        columns += (Column("", "text"),)
    rows = [(f.label, ev.figure(f.key), *([notes.get(f.key, "")] if notes else []))
            for f in figures]
    columns, rows = _extra_columns(ev, "summary_columns", columns, rows,
                                   [f.key for f in figures], figures=(), before_last=False)
    return Table(WORDING[ev.kind]["summary"], columns, tuple(rows))


def fold_table(ev: Evaluation) -> Table | None:
    """Per-fold figures, or None without folds."""
    if ev.folds is None:
        return None
    f = ev.folds
    figures = ev.figures(PER_FOLD)
    rows = [(_py(fold), *(figure_cell(f, i, fig) for fig in figures))
            for i, fold in enumerate(f.coords["fold"].values)]
    note = ""
    s = ev.fold_summary
    if s is not None:
        note = (f"mean R_K {s.mean_rk:.3f}, sd {format_value(s.sd_rk, 'metric')}, "
                f"range {s.min_rk:.3f} to {s.max_rk:.3f}; pooled R_K {ev.rk:.3f}")
    columns = (Column("fold", "label"), *(figure_column(fig) for fig in figures))
    for more in hooks(ev, "fold_columns"):
        for column, values in more(ev):
            columns += (column,)
            rows = [(*row, value) for row, value in zip(rows, values)]
    return Table("Folds", columns, tuple(rows), note)


def class_table(ev: Evaluation, top: int | None = 20) -> Table:
    """Per-class (or per-label) figures, costliest first; ``top=None`` shows all."""
    d = ev.ranked()
    dim = ev.row_scope
    k = d.sizes[dim]
    flagged = d["flags"].values > 0 if "flags" in d else np.zeros(k, bool)
    listed = [i for i in range(k) if top is None or i < top or flagged[i]]
    shown = len(listed)
    figures = ev.figures(dim)
    keys = [_py(d.coords[dim].values[i]) for i in listed]
    rows = [(key, *(figure_cell(d, i, fig) for fig in figures)) for i, key in zip(listed, keys)]
    columns = (Column(dim, "label"), *(figure_column(fig) for fig in figures))
    columns, rows = _extra_columns(ev, "class_columns", columns, rows, keys, figures=figures,
                                   before_last=True)
    words = WORDING[ev.kind]
    notes = [words["note"]] + [note(ev) for note in hooks(ev, "class_note")]
    if shown < k:
        notes.append(f"{k - shown} more {words['unit']} not shown (use --top all)")
    if top is not None and shown > min(top, k):
        notes.append(f"{shown - min(top, k)} flagged {words['unit']} listed beyond the top {top}")
    title = f"{words['rows'].split(' by ')[0]} by {ev.rank_words}"
    return Table(f"{title} (top {shown} of {k})", columns, tuple(rows),
                 "; ".join(n for n in notes if n))


def score_report(ev: Evaluation, *, top: int | None = 20, source: str | None = None) -> Report:
    """Assemble the report of ``foldcorr score`` from an evaluation of any tensor kind.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> r = score_report(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])))
    >>> [t.title for t in r.tables]
    ['Pooled over all samples', 'Classes by shortfall share (top 2 of 2)']
    """
    src = source or ev.tensor.attrs.get("source", "(in memory)")
    folds = ev.folds.sizes["fold"] if ev.folds is not None else "none"
    words = WORDING[ev.kind]
    facts = (("source", str(src)), ("samples", format_value(ev.n, "count")),
             (words["unit"], str(ev.rows.sizes[ev.row_scope])), ("folds", str(folds)),
             *((f.headline, format_value(ev.figure(f.key), "metric"))
               for f in ev.figures(POOLED) if f.headline))
    tables = [summary_table(ev), fold_table(ev), class_table(ev, top)]
    for make in hooks(ev, "tables"):
        tables.extend(make(ev, top))
    return Report(words["title"], facts, tuple(t for t in tables if t is not None), ev.warnings)


def plot_text(label) -> str:
    """A label as literal plot text: ``$`` never starts math, control characters are spaces.

    Examples
    --------
    >>> print(plot_text("$x$ costs 5 $"))
    \\$x\\$ costs 5 \\$
    """
    text = "".join(" " if ch < " " or ch == "\x7f" else ch for ch in str(label))
    return text.replace("$", "\\$")

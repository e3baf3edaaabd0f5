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
           "figure_cell", "COLUMN_KIND", "WORDING", "plot_text", "format_interval",
           "format_threshold", "legend", "COLUMN_WORDS", "COLUMN_PRIORITY", "MAX_WARNINGS"]


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

    @property
    def priority(self) -> int:
        """How long the column stays when a table is too wide: lowest is dropped first.

        Examples
        --------
        >>> Column("w/o class").priority < Column("MCC").priority
        True
        """
        if self.title in COLUMN_PRIORITY:
            return COLUMN_PRIORITY[self.title]
        return 6 if " CI" in self.title or "interval" in self.title else 5


#: Priority of columns by title (see :attr:`Column.priority`; unlisted titles have 5). When a
#: table is wider than the terminal, columns are dropped lowest first, the rightmost first
#: among equals; the first column (the row's name) always stays.
COLUMN_PRIORITY = {
    "verdict": 10, "MCC": 9, "R_K": 9, "value": 9, "limit": 9, "checks": 9, "macro MCC": 8,
    "drag": 8, "shortfall share": 8, "cost": 8, "in truth": 7, "flags": 7,
    "most often taken for": 6, "samples": 6, "accuracy": 6, "predicted": 4, "recall": 4,
    "precision": 4, "F1": 4, "bal. acc.": 4, "fix both": 3, "weight": 3, "contrib.": 3,
    "prevalence": 3, "mismatch share": 2, "fix FN": 2, "fix FP": 2, "w/o class": 1,
}

#: What each column word means, for the one-line legend under a table (text and Markdown).
COLUMN_WORDS = {
    "in truth": "samples of this actual class",
    "predicted": "samples predicted as it",
    "MCC": "one-vs-rest MCC",
    "weight": "w_k, its weight in R_K",
    "contrib.": "w_k x MCC_k (these sum to R_K)",
    "drag": "w_k x (1 - MCC_k)",
    "mismatch share": "its part of the marginal mismatch",
    "shortfall share": "drag + mismatch share (these sum to 1 - R_K)",
    "recall": "right among its true samples",
    "precision": "right among its predictions",
    "F1": "mean of precision and recall (harmonic)",
    "flags": "reasons to look",
    "most often taken for": "its most frequent wrong prediction (count)",
    "bal. acc.": "balanced accuracy",
    "macro MCC": "mean one-vs-rest MCC over classes",
    "prevalence": "share of samples with the label",
    "cost": "(1 - MCC) x in truth",
    "fix FN": "R_K gain if its misses were right",
    "fix FP": "R_K gain if its false alarms were right",
    "fix both": "R_K gain if both were",
    "w/o class": "R_K without it, minus R_K",
    "optimism": "best in-sample MCC minus mean held-out MCC",
    "verdict": "PASS or FAIL",
    "limit": "what the rule asks",
    "floor": "the lowest MCC allowed",
}


def legend(columns) -> str:
    """One line explaining the column words of a table ("" when none needs it).

    Examples
    --------
    >>> legend([Column("class", "label"), Column("drag"), Column("MCC 95% CI", "text")])
    'drag: w_k x (1 - MCC_k); MCC 95% CI: interval low to high'
    """
    parts = []
    for col in columns:
        if col.title in COLUMN_WORDS:
            parts.append(f"{col.title}: {COLUMN_WORDS[col.title]}")
        elif " CI" in col.title or "interval" in col.title:
            parts.append(f"{col.title}: interval low to high")
    return "; ".join(parts)


@dataclass(frozen=True)
class Table:
    """A titled table of raw values."""

    title: str
    columns: tuple[Column, ...]
    rows: tuple[tuple, ...]
    note: str = ""
    brief: tuple[int, ...] | None = None
    """Indices of the rows a short form (Markdown's table) shows; None: every row."""

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


def _unsigned_zero(text: str) -> str:
    return text[1:] if text.startswith("-") and not text.strip("-0.") else text


def format_value(value, kind: str) -> str:
    """Format one cell: figures with three decimals, never a negative zero; undefined is ``n/a``.

    Examples
    --------
    >>> format_value(0.12345, "metric"), format_value(1200, "count"), format_value(None, "metric")
    ('0.123', '1200', 'n/a')
    >>> format_value(12.5, "count"), format_value(-0.0001, "metric")
    ('12.5', '0.000')
    """
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "n/a"
    if kind in ("metric", "correlation"):
        return _unsigned_zero(f"{value:.3f}")
    if kind == "count":
        number = float(value)
        return f"{int(number)}" if number.is_integer() else f"{number:.1f}"
    return str(value)


def format_interval(low, high, kind: str = "metric") -> str:
    """An interval, the one way every report writes one: ``low to high``.

    Examples
    --------
    >>> format_interval(-0.1472, -0.1118), format_interval(0.5, float("nan"))
    ('-0.147 to -0.112', '0.500 to n/a')
    """
    return f"{format_value(_py(low), kind)} to {format_value(_py(high), kind)}"


def format_threshold(value) -> str:
    """A score threshold with four significant digits (never a negative zero).

    Examples
    --------
    >>> format_threshold(0.0566914), format_threshold(0.53072), format_threshold(None)
    ('0.05669', '0.5307', 'n/a')
    """
    if value is None or value != value:
        return "n/a"
    return _unsigned_zero(f"{float(value):.4g}")


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
                 "note": "the labels that cost the most come first"},
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
    note = _fold_line(ev)
    columns = (Column("fold", "label"), *(figure_column(fig) for fig in figures))
    for more in hooks(ev, "fold_columns"):
        for column, values in more(ev):
            columns += (column,)
            rows = [(*row, value) for row, value in zip(rows, values)]
    return Table("Folds", columns, tuple(rows), note)


def _fold_line(ev: Evaluation) -> str:
    s = ev.fold_summary
    if s is None:
        return ""
    return (f"mean R_K over folds {format_value(s.mean_rk, 'metric')}, sd "
            f"{format_value(s.sd_rk, 'metric')}, range {format_interval(s.min_rk, s.max_rk)}; "
            f"pooled R_K {format_value(ev.rk, 'metric')}")


def class_table(ev: Evaluation, top: int | None = 20, *, brief: int | None = None) -> Table:
    """Per-class (or per-label) figures, costliest first; ``top=None`` shows all.

    ``brief`` marks the rows a short form shows (the first ``brief`` and every
    flagged one) while the table holds ``top`` rows.
    """
    d = ev.ranked()
    dim = ev.row_scope
    k = d.sizes[dim]
    flagged = d["flags"].values > 0 if "flags" in d else np.zeros(k, bool)

    def chosen(limit):
        return [i for i in range(k) if limit is None or i < limit or flagged[i]]

    listed = chosen(top)
    shown = len(listed)
    figures = ev.figures(dim)
    labels = d.coords[dim].values  # once: an Arrow-backed index converts on every access
    keys = [_py(labels[i]) for i in listed]
    rows = [(key, *(figure_cell(d, i, fig) for fig in figures)) for i, key in zip(listed, keys)]
    columns = (Column(dim, "label"), *(figure_column(fig) for fig in figures))
    columns, rows = _extra_columns(ev, "class_columns", columns, rows, keys, figures=figures,
                                   before_last=True)
    words = WORDING[ev.kind]
    notes = [words["note"]] + [note(ev) for note in hooks(ev, "class_note")]
    if shown < k:
        notes.append(f"{k - shown} more {words['unit']} not shown here; every one is in the "
                     "JSON and HTML reports")
    if top is not None and shown > min(top, k):
        notes.append(f"{shown - min(top, k)} flagged {words['unit']} listed beyond the top {top}")
    rows_brief = None if brief is None else tuple(listed.index(i) for i in chosen(brief))
    title = f"{words['rows'].split(' by ')[0]} by {ev.rank_words}"
    return Table(f"{title} (top {shown} of {k})", columns, tuple(rows),
                 "; ".join(n for n in notes if n), brief=rows_brief)


#: Warnings shown in the short summary (``top=0``); the JSON report carries every one.
MAX_WARNINGS = 5


def _summary_only(ev: Evaluation, facts: tuple) -> Report:
    """The short summary: headline figures, the fold line, flagged classes, a few warnings."""
    d = ev.ranked()
    words = WORDING[ev.kind]
    flagged = []
    if "flags" in d:
        names = d.coords[ev.row_scope].values
        flagged = [f"{_py(names[i])!s} ({', '.join(flag_words(v))})"
                   for i, v in enumerate(d["flags"].values) if v > 0]
    lines = [_fold_line(ev)]
    if flagged:
        more = f" and {len(flagged) - 5} more" if len(flagged) > 5 else ""
        lines.append(f"flagged {words['unit']}: " + "; ".join(flagged[:5]) + more)
    summary = summary_table(ev)
    summary = Table(summary.title, summary.columns, summary.rows,
                    "; ".join(line for line in lines if line))
    warned = list(ev.warnings[:MAX_WARNINGS])
    if len(ev.warnings) > MAX_WARNINGS:
        warned.append(f"{len(ev.warnings) - MAX_WARNINGS} more warnings in the JSON report")
    return Report(words["title"], facts, (summary,), tuple(warned))


def score_report(ev: Evaluation, *, top: int | None = 20, source: str | None = None,
                 brief: int | None = None) -> Report:
    """Assemble the report of ``foldcorr score`` from an evaluation of any tensor kind.

    ``top=0`` gives the short summary only (headline figures, the fold line,
    flagged classes and the first :data:`MAX_WARNINGS` warnings). ``brief``
    marks, in tables of ``top`` rows, the rows a short form shows.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> r = score_report(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])))
    >>> [t.title for t in r.tables]
    ['Pooled over all samples', 'Classes by shortfall share (top 2 of 2)']
    >>> [t.title for t in score_report(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])),
    ...                                top=0).tables]
    ['Pooled over all samples']
    """
    src = source or ev.tensor.attrs.get("source", "(in memory)")
    folds = ev.folds.sizes["fold"] if ev.folds is not None else "none"
    words = WORDING[ev.kind]
    facts = (("source", str(src)), ("samples", format_value(ev.n, "count")),
             (words["unit"], str(ev.rows.sizes[ev.row_scope])), ("folds", str(folds)),
             *((f.headline, format_value(ev.figure(f.key), "metric"))
               for f in ev.figures(POOLED) if f.headline))
    if top == 0:
        return _summary_only(ev, facts)
    tables = [summary_table(ev), fold_table(ev), class_table(ev, top, brief=brief)]
    for make in hooks(ev, "tables"):  # the tables of sections show the short form's rows
        tables.extend(make(ev, top if brief is None else brief))
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

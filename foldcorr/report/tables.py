"""Report content as plain tables, shared by the text and Markdown renderers.

A :class:`Table` is data: a title, columns that know how to format their cells,
and rows of raw values. Renderers lay it out; nothing here computes a metric.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from foldcorr.evaluation import Evaluation
from foldcorr.report.sections import hooks

__all__ = ["Column", "Table", "Report", "score_report", "format_value"]


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


def summary_table(ev: Evaluation) -> Table:
    """Pooled figures, one row per figure."""
    names = {
        "rk": "R_K",
        "accuracy": "accuracy",
        "balanced_accuracy": "balanced accuracy",
        "kappa": "Cohen's kappa",
        "macro_f1": "macro F1",
        "macro_mcc": "macro one-vs-rest MCC",
        "marginal_mismatch": "marginal mismatch",
    }
    notes: dict[str, str] = {}
    for more in hooks(ev, "summary_notes"):
        notes.update(more(ev))
    columns = (Column("figure", "label"), Column("value"))
    if notes:
        columns += (Column("", "text"),)
    rows = tuple((label, ev.figure(name), *([notes.get(name, "")] if notes else []))
                 for name, label in names.items())
    return Table("Pooled over all samples", columns, rows)


def fold_table(ev: Evaluation) -> Table | None:
    """Per-fold figures, or None without folds."""
    if ev.folds is None:
        return None
    f = ev.folds
    rows = tuple(
        (_py(fold), _py(f["n"].values[i]), float(f["rk"].values[i]),
         float(f["accuracy"].values[i]), float(f["balanced_accuracy"].values[i]),
         float(f["macro_mcc"].values[i]))
        for i, fold in enumerate(f.coords["fold"].values)
    )
    s = ev.fold_summary
    note = (f"mean R_K {s.mean_rk:.3f}, sd {format_value(s.sd_rk, 'metric')}, "
            f"range {s.min_rk:.3f} to {s.max_rk:.3f}; pooled R_K {ev.rk:.3f}")
    columns = (Column("fold", "label"), Column("samples", "count"), Column("R_K", "correlation"),
               Column("accuracy"), Column("bal. acc."), Column("macro MCC", "correlation"))
    for more in hooks(ev, "fold_columns"):
        for column, values in more(ev):
            columns += (column,)
            rows = tuple((*row, value) for row, value in zip(rows, values))
    return Table("Folds", columns, rows, note)


def class_table(ev: Evaluation, top: int | None = 20) -> Table:
    """Per-class figures sorted by drag, largest first; ``top=None`` shows all."""
    d = ev.by_drag()
    k = d.sizes["class"]
    shown = k if top is None else min(top, k)
    rows = []
    for i in range(shown):
        row = d.isel({"class": i})
        confusion = _py(row["top_confusion"].values)
        wrong = "" if int(row["top_confusion_count"]) == 0 else f"{confusion} ({format_value(_py(row['top_confusion_count'].values), 'count')})"
        rows.append((
            _py(row.coords["class"].values), _py(row["support"].values),
            _py(row["predicted"].values), float(row["mcc"]), float(row["weight"]),
            float(row["contribution"]), float(row["drag"]), float(row["recall"]),
            float(row["precision"]), wrong,
        ))
    columns = (Column("class", "label"), Column("support", "count"), Column("predicted", "count"),
               Column("MCC", "correlation"), Column("weight"), Column("contrib."),
               Column("drag"), Column("recall"), Column("precision"),
               Column("most often taken for", "text"))
    for more in hooks(ev, "class_columns"):
        for column, by_class in more(ev):
            columns = (*columns[:-1], column, columns[-1])
            rows = [(*row[:-1], by_class.get(row[0]), row[-1]) for row in rows]
    note = "" if shown == k else f"{k - shown} more classes not shown (use --top all)"
    return Table(f"Classes by drag (top {shown} of {k})", columns, tuple(rows), note)


def score_report(ev: Evaluation, *, top: int | None = 20, source: str | None = None) -> Report:
    """Assemble the report of ``foldcorr score`` from an evaluation.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> r = score_report(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])))
    >>> [t.title for t in r.tables]
    ['Pooled over all samples', 'Classes by drag (top 2 of 2)']
    """
    src = source or ev.tensor.attrs.get("source", "(in memory)")
    folds = ev.fold_summary.count if ev.fold_summary else "none"
    facts = (("source", str(src)), ("samples", format_value(ev.n, "count")),
             ("classes", str(len(ev.classes))), ("folds", str(folds)),
             ("R_K", format_value(ev.rk, "metric")))
    tables = [summary_table(ev), fold_table(ev), class_table(ev, top)]
    for make in hooks(ev, "tables"):
        tables.extend(make(ev, top))
    return Report("foldcorr score", facts, tuple(t for t in tables if t is not None), ev.warnings)

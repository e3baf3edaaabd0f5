"""Report section of the repair analysis (extras key ``"repair"``).

Hooks (see :mod:`foldcorr.report.sections`): repair-gain columns in the
per-class table, a "costliest confusions" table, and the JSON keys
``confusions`` and ``per_class[].gain_fix_fn``, ``gain_fix_fp``,
``gain_fix_both``, ``leave_out_delta`` (plus ``drag_fold_sd``); with folds the class
table also shows each class's ``fold ranks`` (:func:`foldcorr.report.classfold.rank_column`).
Nothing here computes: every figure comes from a
:class:`foldcorr.analysis.repair.RepairAnalysis`.
"""

from __future__ import annotations

import numpy as np

from foldcorr.report.classfold import rank_column
from foldcorr.report.tables import Column, Table

__all__ = ["KEY", "class_columns", "tables", "json", "confusion_table", "render_rich"]

#: Key of the section in ``Evaluation.extras``.
KEY = "repair"

_GAIN_COLUMNS = (
    ("gain_fix_fn", "fix FN"),
    ("gain_fix_fp", "fix FP"),
    ("gain_fix_both", "fix both"),
    ("leave_out_delta", "w/o class"),
)


def _labels(ra) -> list:
    return [_py(v) for v in ra.per_class.coords["class"].values]


def _py(value):
    return value.item() if isinstance(value, np.generic) else value


def _number(value):
    v = _py(value)
    return None if isinstance(v, float) and np.isnan(v) else v


def class_columns(ev) -> list:
    """Repair-gain columns of the per-class table, keyed by class label.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.analysis.repair import repair_analysis
    >>> t = confusion_tensor([[5, 1], [2, 6]], ["a", "b"])
    >>> ev = evaluate(t).with_extra("repair", repair_analysis(t))
    >>> [c.title for c, _ in class_columns(ev)]
    ['fix FN', 'fix FP', 'fix both', 'w/o class']
    """
    ra = ev.extras[KEY]
    labels = _labels(ra)
    out = []
    for name, title in _GAIN_COLUMNS:
        values = ra.per_class[name].values
        out.append((Column(title), {lab: float(v) for lab, v in zip(labels, values)}))
    return out + rank_column(ev)


def confusion_table(ra, top: int | None = 20) -> Table:
    """The costliest confusions as a report table (at most ``top`` rows).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.analysis.repair import repair_analysis
    >>> ra = repair_analysis(confusion_tensor([[5, 1], [2, 6]], ["a", "b"]))
    >>> confusion_table(ra).cells()
    [['1', 'b', 'a', '2', '0.283'], ['2', 'a', 'b', '1', '0.173']]
    """
    rows = ra.confusion_rows()
    shown = rows if top is None else rows[:top]
    columns = (Column("#", "count"), Column("actual", "label"), Column("taken for", "label"),
               Column("count", "count"), Column("gain"))
    body = tuple((i + 1, *row) for i, row in enumerate(shown))
    note = (f"#: rank; count: samples in the cell; gain: R_K after moving the cell's counts to "
            f"the diagonal, minus R_K ({_fmt(ra.rk)})")
    if not rows:
        return Table("Costliest confusions (none)", columns, body,
                     "no confusions: every sample is on the diagonal")
    return Table(f"Costliest confusions (top {len(shown)} by repair gain)", columns, body, note)


def _fmt(value) -> str:
    return "n/a" if value != value else f"{value:.3f}"


def tables(ev, top) -> list:
    """The "costliest confusions" table.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.analysis.repair import repair_analysis
    >>> t = confusion_tensor([[5, 1], [2, 6]], ["a", "b"])
    >>> [tb.title for tb in tables(evaluate(t).with_extra("repair", repair_analysis(t)), 1)]
    ['Costliest confusions (top 1 by repair gain)']
    """
    return [confusion_table(ev.extras[KEY], top)]


def json(ev, doc: dict) -> None:
    """Add ``confusions`` and the per-class repair keys to a score document.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.analysis.repair import repair_analysis
    >>> from foldcorr.report.json import score_dict
    >>> t = confusion_tensor([[5, 1], [2, 6]], ["a", "b"])
    >>> doc = score_dict(evaluate(t).with_extra("repair", repair_analysis(t)))
    >>> doc["confusions"][0]["actual"], doc["confusions"][0]["count"]
    ('b', 2)
    >>> sorted(k for k in doc["per_class"][0] if k.startswith("gain"))
    ['gain_fix_both', 'gain_fix_fn', 'gain_fix_fp']
    """
    ra = ev.extras[KEY]
    doc["confusions"] = [
        {"actual": a, "predicted": p, "count": n, "gain": _number(g)}
        for a, p, n, g in ra.confusion_rows()
    ]
    doc["repair"] = {"rk": _number(ra.rk), "confusions_top": ra.top,
                     "stability_top": ra.stability_top}
    index = {lab: i for i, lab in enumerate(_labels(ra))}
    pc = ra.per_class
    folds = "top_folds" in pc
    for entry in doc.get("per_class", []):
        i = index.get(_py(entry.get("class")))
        if i is None:
            continue
        for name, _ in _GAIN_COLUMNS:
            entry[name] = _number(pc[name].values[i])
        entry["drag_fold_sd"] = _number(pc["drag_sd"].values[i]) if folds else None


def render_rich(ra):
    """A rich renderable of a repair analysis (its costliest-confusions table).

    Examples
    --------
    >>> import io
    >>> from rich.console import Console
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.analysis.repair import repair_analysis
    >>> console = Console(file=io.StringIO(), width=100, color_system=None)
    >>> console.print(repair_analysis(confusion_tensor([[5, 1], [2, 6]], ["a", "b"])))
    >>> "Costliest confusions" in console.file.getvalue()
    True
    """
    from foldcorr.report.tables import Report
    from foldcorr.report.text import render_rich as render_report

    return render_report(Report("foldcorr repair", (("R_K", _fmt(ra.rk)),),
                                (confusion_table(ra, ra.top),), ra.warnings))

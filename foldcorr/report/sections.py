"""Report sections contributed by analyses.

An analysis attaches its result to an evaluation with
``Evaluation.with_extra(key, result)``. The report module named for that key
in :data:`SECTIONS` says how to show it, through any of these optional hooks:

``summary_notes(ev) -> dict[str, str]``
    Text beside pooled figures (e.g. an interval beside ``rk``).
``summary_columns(ev) -> list[tuple[Column, dict]]``
    Extra columns of the pooled table, values keyed by figure key.
``fold_columns(ev) -> list[tuple[Column, list]]``
    Extra columns of the fold table, one value per fold in fold order.
``class_columns(ev) -> list[tuple[Column, dict]]``
    Extra columns of the per-class (or per-label) table, values keyed by class
    (or label), placed before the last column; a third item, a figure key,
    places the column right after that figure's column.
``class_note(ev) -> str``
    A sentence added to the note of the per-class (or per-label) table.
``tables(ev, top) -> list[Table]``
    Whole tables shown after the core tables.
``json(ev, doc) -> None``
    Adds keys to the JSON document (top level, or inside ``pooled``,
    ``folds``, ``per_class`` and ``per_label`` entries).

Modules are imported only when their key is present, so an evaluation without
sections never loads them.
"""

from __future__ import annotations

import importlib

__all__ = ["SECTIONS", "hooks"]

#: Extras key -> report module that renders it, in report order.
SECTIONS: dict[str, str] = {
    "uncertainty": "foldcorr.report.uncertainty",
    "repair": "foldcorr.report.repair",
    "shifted": "foldcorr.report.shift",
    "intervals": "foldcorr.report.intervals",
    "groups": "foldcorr.report.groups",
}


def hooks(ev, name: str) -> list:
    """The hook ``name`` of every section present in ``ev.extras``, in order.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> hooks(evaluate(confusion_tensor([[1, 0], [0, 1]], [0, 1])), "tables")
    []
    """
    found = []
    for key, module in SECTIONS.items():
        if key in ev.extras:
            hook = getattr(importlib.import_module(module), name, None)
            if hook is not None:
                found.append(hook)
    return found

"""The Document of an evaluation: what ``foldcorr score`` and ``foldcorr show`` write."""

from __future__ import annotations

from dataclasses import replace

from foldcorr.evaluation import Evaluation
from foldcorr.report import classfold
from foldcorr.report.documents import Document
from foldcorr.report.json import score_dict
from foldcorr.report.tables import score_report

__all__ = ["score_document"]


def score_document(ev: Evaluation, *, top: int | None = 20, source: str | None = None,
                   brief: int | None = None) -> Document:
    """The tables (cut to ``top`` rows, ``brief`` of them marked), the complete JSON and the plots.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> doc = score_document(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])), top=1)
    >>> len(doc.report.tables[-1].rows), len(doc.make_json()["per_class"])
    (1, 2)
    """

    def figures():
        from foldcorr.report.html import svg_figures

        return svg_figures(ev)

    report = score_report(ev, top=top, source=source, brief=brief)
    by_fold = classfold.class_fold_table(ev, top) if top != 0 else None
    if by_fold is not None:  # right after the class table
        at = next(i for i, t in enumerate(report.tables) if t.title.startswith("Classes by")) + 1
        report = replace(report, tables=(*report.tables[:at], by_fold, *report.tables[at:]))

    def json_doc():
        doc = score_dict(ev)
        classfold.json(ev, doc)
        return doc

    return Document(report, json_doc, figures)

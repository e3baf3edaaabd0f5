"""Report section of multilabel bootstrap intervals (extras key ``"intervals"``).

Hooks (see :mod:`foldcorr.report.sections`): an interval column beside the
micro, macro and weighted MCC, an interval column in the label table with a
note on how it was drawn, and the JSON keys ``ci``, ``micro_mcc_ci``,
``macro_mcc_ci``, ``weighted_mcc_ci`` and ``per_label[].mcc_ci``. Nothing here
computes: every figure comes from a
:class:`foldcorr.analysis.multilabel.MultilabelIntervals`.
"""

from __future__ import annotations

from foldcorr.report.tables import Column, format_interval

__all__ = ["KEY", "AVERAGES", "summary_columns", "class_columns", "class_note", "json"]

#: Key of the section in ``Evaluation.extras``.
KEY = "intervals"

#: The pooled figures that carry an interval.
AVERAGES = ("micro_mcc", "macro_mcc", "weighted_mcc")


def _pair(low, high) -> str:
    return format_interval(low, high)


def _example():
    from foldcorr.analysis.multilabel import multilabel_intervals
    from foldcorr.tensor import multilabel_tally
    from foldcorr.evaluation import evaluate

    t = multilabel_tally([[1, 0], [1, 1], [0, 1], [0, 0]] * 10,
                         [[1, 0], [0, 1], [0, 1], [0, 0]] * 10, labels=["gull", "tern"])
    return evaluate(t).with_extra(KEY, multilabel_intervals(t, n_resamples=100, seed=1))


def summary_columns(ev) -> list:
    """The interval of each average, beside it.

    Examples
    --------
    >>> [c.title for c, _ in summary_columns(_example())]
    ['95% interval']
    """
    ci = ev.extras[KEY]
    return [(Column(f"{ci.level:.0%} interval", "text"),
             {key: _pair(*getattr(ci, key)) for key in AVERAGES})]


def class_columns(ev) -> list:
    """The interval of each label's MCC, keyed by label, shown after the MCC.

    Examples
    --------
    >>> [c.title for c, _, _ in class_columns(_example())]
    ['MCC interval']
    """
    ci = ev.extras[KEY]
    return [(Column("MCC interval", "text"),
             {label: _pair(*ci.label_interval(label)) for label in ev.labels}, "mcc")]


def class_note(ev) -> str:
    """How the intervals were drawn.

    Examples
    --------
    >>> class_note(_example()).split(" from ")[0]
    'percentile bootstrap intervals'
    """
    ci = ev.extras[KEY]
    return (f"{ci.method} bootstrap intervals from {ci.n_resamples} resamples, each label "
            "resampled on its own (see docs/multilabel.md)")


def json(ev, doc: dict) -> None:
    """Add ``ci``, the ``*_ci`` pairs and ``per_label[].mcc_ci`` to a multilabel document.

    Examples
    --------
    >>> from foldcorr.report.json import score_dict
    >>> doc = score_dict(_example())
    >>> doc["ci"]["resamples"], len(doc["per_label"][0]["mcc_ci"])
    (100, 2)
    """
    ci = ev.extras[KEY]
    doc["ci"] = {"level": ci.level, "method": ci.method, "resamples": ci.n_resamples,
                 "seed": ci.seed}
    for key in AVERAGES:
        doc[f"{key}_ci"] = list(getattr(ci, key))
    for row in doc.get("per_label", []):
        row["mcc_ci"] = list(ci.label_interval(row["label"]))

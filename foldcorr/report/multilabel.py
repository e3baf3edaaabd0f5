"""Reports of a multilabel evaluation: tables for text and Markdown, and JSON.

``foldcorr.multilabel/1`` keys: ``schema``, ``source``, ``undefined``,
``labels``, ``n``, ``micro_mcc``, ``macro_mcc``, ``weighted_mcc``,
``per_label`` (sorted by cost, largest first), ``folds`` and ``warnings``;
with intervals also ``ci``, ``micro_mcc_ci``, ``macro_mcc_ci``,
``weighted_mcc_ci`` and ``per_label[].mcc_ci`` (see ``docs/json.md``).
"""

from __future__ import annotations

from foldcorr.analysis.multilabel import MultilabelEvaluation
from foldcorr.report.documents import render_report
from foldcorr.report.tables import Column, Report, Table, format_value

__all__ = ["MULTILABEL_SCHEMA", "multilabel_report", "multilabel_dict", "render_multilabel"]

MULTILABEL_SCHEMA = "foldcorr.multilabel/1"

LABEL_KEYS = ("support", "predicted", "prevalence", "mcc", "recall", "precision")


def _py(value):
    return value.item() if hasattr(value, "item") else value


def _pair(low, high) -> str:
    return f"[{format_value(low, 'metric')}, {format_value(high, 'metric')}]"


def multilabel_report(ev: MultilabelEvaluation, *, top: int | None = 20,
                      source: str | None = None) -> Report:
    """The tables of a multilabel evaluation.

    Examples
    --------
    >>> from foldcorr.analysis.multilabel import evaluate_multilabel
    >>> from foldcorr.tensor import multilabel_tally
    >>> ev = evaluate_multilabel(multilabel_tally([[1, 0], [0, 1]], [[1, 0], [1, 1]],
    ...                                           labels=["gull", "tern"]))
    >>> [t.title for t in multilabel_report(ev).tables]
    ['Averages over labels', 'Labels by cost (top 2 of 2)']
    """
    src = source or ev.tensor.attrs.get("source", "(in memory)")
    folds = "none" if ev.folds is None else str(ev.folds.sizes["fold"])
    facts = (("source", str(src)), ("samples", format_value(ev.n, "count")),
             ("labels", str(len(ev.labels))), ("folds", folds),
             ("micro MCC", format_value(ev.micro_mcc, "metric")),
             ("macro MCC", format_value(ev.macro_mcc, "metric")))
    ci = ev.extras.get("intervals")
    columns = (Column("figure", "label"), Column("value", "correlation"))
    rows = (("micro MCC (tensor summed over labels)", ev.micro_mcc, "micro_mcc"),
            ("macro MCC (mean over labels present)", ev.macro_mcc, "macro_mcc"),
            ("support-weighted MCC", ev.weighted_mcc, "weighted_mcc"))
    if ci is not None:
        columns += (Column(f"{ci.level:.0%} interval", "text"),)
        rows = tuple((a, b, _pair(*getattr(ci, k))) for a, b, k in rows)
    else:
        rows = tuple((a, b) for a, b, _ in rows)
    tables = [Table("Averages over labels", columns, rows)]
    if ev.folds is not None:
        f = ev.folds
        tables.append(Table(
            "Folds",
            (Column("fold", "label"), Column("samples", "count"),
             Column("micro MCC", "correlation"), Column("macro MCC", "correlation")),
            tuple((_py(fold), _py(f["n"].values[i]), float(f["micro_mcc"].values[i]),
                   float(f["macro_mcc"].values[i]))
                  for i, fold in enumerate(f.coords["fold"].values)),
        ))
    p = ev.per_label
    k = p.sizes["label"]
    shown = k if top is None else min(top, k)
    columns = (Column("label", "label"), Column("support", "count"), Column("predicted", "count"),
               Column("prevalence"), Column("MCC", "correlation"), Column("recall"),
               Column("precision"), Column("cost", "count"))
    if ci is not None:
        columns = (*columns[:5], Column("MCC interval", "text"), *columns[5:])
    rows = []
    for i in range(shown):
        label = _py(p.coords["label"].values[i])
        row = [label, _py(p["support"].values[i]), _py(p["predicted"].values[i]),
               float(p["prevalence"].values[i]), float(p["mcc"].values[i]),
               float(p["recall"].values[i]), float(p["precision"].values[i]),
               round(float(p["cost"].values[i]), 1)]
        if ci is not None:
            row.insert(5, _pair(*ci.label_interval(label)))
        rows.append(tuple(row))
    note = "cost = (1 - MCC) x support: the labels that cost the most come first"
    if ci is not None:
        note += (f"; {ci.method} bootstrap intervals from {ci.n_resamples} resamples, each label "
                 "resampled on its own (see docs/multilabel.md)")
    if shown < k:
        note += f"; {k - shown} more labels not shown (use --top all)"
    tables.append(Table(f"Labels by cost (top {shown} of {k})", columns, tuple(rows), note))
    return Report("foldcorr score (multilabel)", facts, tuple(tables), ev.warnings)


def multilabel_dict(ev: MultilabelEvaluation) -> dict:
    """The ``foldcorr.multilabel/1`` document.

    Examples
    --------
    >>> from foldcorr.analysis.multilabel import evaluate_multilabel
    >>> from foldcorr.tensor import multilabel_tally
    >>> ev = evaluate_multilabel(multilabel_tally([[1, 0], [0, 1]], [[1, 0], [1, 1]],
    ...                                           labels=["gull", "tern"]))
    >>> doc = multilabel_dict(ev)
    >>> doc["schema"], doc["labels"], [r["label"] for r in doc["per_label"]]
    ('foldcorr.multilabel/1', ['gull', 'tern'], ['gull', 'tern'])
    """
    from foldcorr.report.json import plain

    p = ev.per_label
    per_label = [{"label": _py(lab), **{k: p[k].values[i] for k in LABEL_KEYS}}
                 for i, lab in enumerate(p.coords["label"].values)]
    folds = []
    if ev.folds is not None:
        f = ev.folds
        folds = [{"fold": _py(fold), "n": f["n"].values[i], "micro_mcc": f["micro_mcc"].values[i],
                  "macro_mcc": f["macro_mcc"].values[i]}
                 for i, fold in enumerate(f.coords["fold"].values)]
    doc = {
        "schema": MULTILABEL_SCHEMA,
        "source": ev.tensor.attrs.get("source"),
        "undefined": ev.undefined,
        "labels": ev.labels,
        "n": ev.n,
        "micro_mcc": ev.micro_mcc,
        "macro_mcc": ev.macro_mcc,
        "weighted_mcc": ev.weighted_mcc,
        "per_label": per_label,
        "folds": folds,
        "warnings": list(ev.warnings),
    }
    ci = ev.extras.get("intervals")
    if ci is not None:
        doc["ci"] = {"level": ci.level, "method": ci.method, "resamples": ci.n_resamples,
                     "seed": ci.seed}
        for key in ("micro_mcc", "macro_mcc", "weighted_mcc"):
            doc[f"{key}_ci"] = list(getattr(ci, key))
        for row in per_label:
            row["mcc_ci"] = list(ci.label_interval(row["label"]))
    return plain(doc)


def render_multilabel(ev: MultilabelEvaluation, fmt: str, *, top: int | None = 20) -> str:
    """Render a multilabel evaluation as plain text, Markdown or JSON.

    Examples
    --------
    >>> from foldcorr.analysis.multilabel import evaluate_multilabel
    >>> from foldcorr.tensor import multilabel_tally
    >>> ev = evaluate_multilabel(multilabel_tally([[1, 0], [0, 1]], [[1, 0], [1, 1]]))
    >>> render_multilabel(ev, "markdown").splitlines()[0]
    '## foldcorr score (multilabel)'
    """
    return render_report(multilabel_report(ev, top=top), lambda: multilabel_dict(ev), fmt)

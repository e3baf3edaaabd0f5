"""Report of ``foldcorr compare``: text, Markdown and the ``foldcorr.compare/1`` JSON.

The renderers take a :class:`foldcorr.analysis.compare.Comparison` and never compute;
the verdict sentence only reads its fields.
"""

from __future__ import annotations

import numpy as np

from foldcorr.report.json import plain
from foldcorr.report.tables import Column, Report, Table, format_interval, format_p, format_value
from foldcorr.report.uncertainty import percent

__all__ = ["COMPARE_SCHEMA", "verdict", "compare_report", "compare_dict", "compare_document"]

COMPARE_SCHEMA = "foldcorr.compare/1"


def _m(value) -> str:
    return format_value(float(value), "metric")


def verdict(c, labels=("A", "B")) -> str:
    """One plain sentence: which model is better, and whether the data can tell.

    Examples
    --------
    >>> import numpy as np
    >>> from foldcorr.analysis.compare import compare_models
    >>> from foldcorr.tensor import joint_tally
    >>> y = np.array([0, 1, 2] * 60)
    >>> c = compare_models(joint_tally(y, np.roll(y, 1), y), n_resamples=200, seed=0)
    >>> verdict(c)[:26]
    'model B is better: its R_K'
    """
    a, b = labels
    low, high = c.ci
    lvl = percent(c.level)
    detail = (f"R_K {_m(c.rk_b)} for {b} against {_m(c.rk_a)} for {a}, difference "
              f"{_m(c.difference)} ({lvl} CI {format_interval(low, high)}; permutation p = "
              f"{format_p(c.p_value)})")
    if c.decided:
        winner, loser = (b, a) if c.better == "b" else (a, b)
        return (f"model {winner} is better: its R_K is higher than {loser}'s and the data "
                f"can tell; {detail}")
    if np.isnan(low) or np.isnan(c.difference):
        return f"the difference is undefined, so the data cannot tell; {detail}"
    excludes = low > 0 or high < 0
    if excludes or c.p_value < 1 - c.level:
        return (f"the evidence is borderline: the interval and the permutation test do not "
                f"agree, so the data cannot tell for sure; {detail}")
    return f"the data cannot tell the models apart; {detail}"


def compare_report(c, *, labels=("A", "B"), names=None, top: int | None = 20,
                   source: str | None = None) -> Report:
    """The comparison as a :class:`~foldcorr.report.tables.Report`.

    Examples
    --------
    >>> import numpy as np
    >>> from foldcorr.analysis.compare import compare_models
    >>> from foldcorr.tensor import joint_tally
    >>> y = np.array([0, 1, 2] * 60)
    >>> c = compare_models(joint_tally(y, np.roll(y, 1), y), n_resamples=200, seed=0)
    >>> [t.title for t in compare_report(c).tables]
    ['R_K of each model, paired', 'Classes by difference in one-vs-rest MCC (top 3 of 3)']
    """
    a, b = labels
    lvl = percent(c.level)
    facts = (("source", source or "(in memory)"), ("samples", format_value(c.n, "count")),
             ("classes", str(len(c.classes))),
             ("folds", str(c.folds.sizes["fold"]) if c.folds is not None else "none"))
    if names is not None:
        facts += ((f"model {a}", str(names[0])), (f"model {b}", str(names[1])))
    if c.n_clusters is not None:
        facts += (("clusters", f"{c.n_clusters} (design effect {c.design_effect:.2f})"),)
    facts += (("verdict", verdict(c, labels)),)
    low, high = c.ci
    unit = "samples" if c.n_clusters is None else "whole clusters of samples"
    summary = Table(
        "R_K of each model, paired",
        (Column("figure", "label"), Column("value", "text")),
        ((f"R_K of {a}", _m(c.rk_a)), (f"R_K of {b}", _m(c.rk_b)),
         (f"difference ({b} - {a})", _m(c.difference)),
         (f"{lvl} paired bootstrap CI", format_interval(low, high)),
         ("permutation p-value (two-sided)", format_p(c.p_value)),
         ("resamples / permutations", f"{c.n_resamples} / {c.n_permutations}"),
         ("seed", "none (fresh entropy)" if c.seed is None else str(c.seed))),
        note=f"model {a} and model {b} are scored on the same samples; the interval resamples "
             f"{unit} with both predictions kept together",
    )
    pc = c.per_class
    order = np.argsort(-np.abs(np.nan_to_num(pc["difference"].values)), kind="stable")
    k = len(order)
    shown = k if top is None else min(top, k)
    rows = tuple(
        (_label(pc.coords["class"].values[i]), float(pc["mcc_a"].values[i]),
         float(pc["mcc_b"].values[i]), float(pc["difference"].values[i]),
         format_interval(pc['low'].values[i], pc['high'].values[i]))
        for i in order[:shown]
    )
    classes = Table(
        f"Classes by difference in one-vs-rest MCC (top {shown} of {k})",
        (Column("class", "label"), Column(f"MCC {a}", "correlation"),
         Column(f"MCC {b}", "correlation"), Column(f"{b} - {a}"),
         Column(f"{lvl} CI", "text")),
        rows, "" if shown == k else f"{k - shown} more classes not shown here; every one is in the JSON and HTML reports")
    tables = [summary, classes]
    if c.folds is not None:
        f = c.folds
        tables.append(Table(
            "Folds",
            (Column("fold", "label"), Column(f"R_K {a}", "correlation"),
             Column(f"R_K {b}", "correlation"), Column(f"{b} - {a}"),
             Column(f"{lvl} CI", "text")),
            tuple((_label(fold), float(f["rk_a"].values[i]), float(f["rk_b"].values[i]),
                   float(f["difference"].values[i]),
                   format_interval(f['low'].values[i], f['high'].values[i]))
                  for i, fold in enumerate(f.coords["fold"].values)),
        ))
    return Report("foldcorr compare", facts, tuple(tables), c.warnings)


def _label(value):
    return value.item() if hasattr(value, "item") else value


def compare_dict(c, *, labels=("A", "B"), names=None, source: str | None = None) -> dict:
    """The ``foldcorr.compare/1`` document of a comparison.

    Examples
    --------
    >>> import numpy as np
    >>> from foldcorr.analysis.compare import compare_models
    >>> from foldcorr.tensor import joint_tally
    >>> y = np.array([0, 1, 2] * 60)
    >>> c = compare_models(joint_tally(y, np.roll(y, 1), y), n_resamples=200, seed=0)
    >>> doc = compare_dict(c)
    >>> doc["schema"], doc["b"]["rk"], doc["difference"]["p_value"] < 0.01
    ('foldcorr.compare/1', 1.0, True)
    """
    pc = c.per_class
    per_class = [
        {"class": pc.coords["class"].values[i], "mcc_a": pc["mcc_a"].values[i],
         "mcc_b": pc["mcc_b"].values[i], "difference": pc["difference"].values[i],
         "ci": [pc["low"].values[i], pc["high"].values[i]]}
        for i in range(pc.sizes["class"])
    ]
    folds = []
    if c.folds is not None:
        f = c.folds
        folds = [{"fold": fold, "rk_a": f["rk_a"].values[i], "rk_b": f["rk_b"].values[i],
                  "difference": f["difference"].values[i],
                  "ci": [f["low"].values[i], f["high"].values[i]]}
                 for i, fold in enumerate(f.coords["fold"].values)]
    doc = {
        "schema": COMPARE_SCHEMA,
        "source": source,
        "n": c.n,
        "classes": c.classes,
        "a": {"label": labels[0], "name": None if names is None else names[0], "rk": c.rk_a},
        "b": {"label": labels[1], "name": None if names is None else names[1], "rk": c.rk_b},
        "difference": {"estimate": c.difference, "ci": list(c.ci), "p_value": c.p_value,
                       "resamples": c.n_resamples, "permutations": c.n_permutations,
                       "level": c.level, "seed": c.seed, "method": "percentile",
                       "clusters": c.n_clusters, "design_effect": c.design_effect},
        "verdict": {"better": c.better, "decided": c.decided, "text": verdict(c, labels)},
        "per_class": per_class,
        "folds": folds,
        "warnings": list(c.warnings),
    }
    return plain(doc)


def compare_document(c, *, labels=("A", "B"), names=None, top: int | None = 20,
                     source: str | None = None):
    """The :class:`~foldcorr.report.documents.Document` of a comparison.

    Examples
    --------
    >>> import numpy as np
    >>> from foldcorr.analysis.compare import compare_models
    >>> from foldcorr.report import render
    >>> from foldcorr.tensor import joint_tally
    >>> y = np.array([0, 1, 2] * 60)
    >>> c = compare_models(joint_tally(y, np.roll(y, 1), y), n_resamples=200, seed=0)
    >>> render(c, "markdown").splitlines()[0]
    '## foldcorr compare'
    >>> render(c, "html").startswith("<!DOCTYPE html>")
    True
    """
    from foldcorr.report.documents import Document

    report = compare_report(c, labels=labels, names=names, top=top, source=source)
    return Document(report, lambda: compare_dict(c, labels=labels, names=names, source=source))

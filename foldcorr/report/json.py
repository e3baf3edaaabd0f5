"""JSON rendering: the versioned contract other programs rely on.

The keys of figures come from :data:`foldcorr.figures.FIGURES`, so JSON
carries what the text tables show, and always every class, label and fold
(``--top`` limits rows of text, Markdown and HTML only).

``foldcorr.score/2`` keys: ``schema``, ``source``, ``n``, ``classes``,
``undefined``, ``pooled``, ``folds``, ``fold_summary``, ``per_class`` and
``warnings``. ``foldcorr.multilabel/1`` keys: ``schema``, ``source``,
``undefined``, ``labels``, ``n``, ``micro_mcc``, ``macro_mcc``,
``weighted_mcc``, ``per_label`` (sorted by cost, largest first), ``folds`` and
``warnings`` (see ``docs/json.md``). Undefined values are ``null`` under the
``nan`` convention; non-finite numbers are never written.
"""

from __future__ import annotations

import json
import math

import numpy as np

from foldcorr.decomposition import flag_words
from foldcorr.evaluation import Evaluation
from foldcorr.figures import MULTILABEL, PER_FOLD, POOLED
from foldcorr.report.sections import hooks

__all__ = ["SCORE_SCHEMA", "MULTILABEL_SCHEMA", "score_dict", "dumps", "plain", "pooled_figures",
           "fold_rows", "row_entries"]

SCORE_SCHEMA = "foldcorr.score/2"
MULTILABEL_SCHEMA = "foldcorr.multilabel/1"


def plain(value):
    """A JSON-ready Python value: numpy scalars unwrapped, NaN and infinities as None.

    Examples
    --------
    >>> plain(np.float64("nan")), plain(np.int64(3)), plain(0.5)
    (None, 3, 0.5)
    """
    if isinstance(value, np.ndarray):
        return [plain(v) for v in value.tolist()]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, dict):
        return {k: plain(v) for k, v in value.items()}
    return value


def pooled_figures(ev: Evaluation) -> dict:
    """The pooled figures of an evaluation by key (counts are top-level keys instead).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> list(pooled_figures(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))))[:3]
    ['rk', 'accuracy', 'balanced_accuracy']
    """
    return {f.key: ev.figure(f.key) for f in ev.figures(POOLED) if f.style != "count"}


def _entry(table, i: int, figure) -> object:
    if figure.style == "flags":
        return flag_words(table[figure.key].values[i])
    if figure.style != "confusion":
        return table[figure.key].values[i]
    count = table[f"{figure.key}_count"].values[i]
    return None if count == 0 else {"predicted": table[figure.key].values[i], "count": count}


def fold_rows(ev: Evaluation) -> list[dict]:
    """One entry per fold with every per-fold figure (empty without folds).

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(tally(["a", "b", "a", "b"], ["a", "b", "b", "b"], folds=[1, 1, 2, 2]))
    >>> sorted(fold_rows(ev)[0])
    ['accuracy', 'balanced_accuracy', 'fold', 'macro_mcc', 'n', 'rk']
    """
    if ev.folds is None:
        return []
    f = ev.folds
    figures = ev.figures(PER_FOLD)
    return [{"fold": fold, **{fig.key: _entry(f, i, fig) for fig in figures}}
            for i, fold in enumerate(f.coords["fold"].values)]


def row_entries(ev: Evaluation) -> list[dict]:
    """One entry per class (or label), costliest first, with every figure of that scope.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> rows = row_entries(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])))
    >>> plain([rows[0]["class"], rows[0]["top_confusion"]])
    ['p', {'predicted': 'n', 'count': 2}]
    """
    d = ev.ranked()
    dim = ev.row_scope
    figures = ev.figures(dim)
    return [{dim: label, **{fig.key: _entry(d, i, fig) for fig in figures}}
            for i, label in enumerate(d.coords[dim].values)]


def score_dict(ev: Evaluation) -> dict:
    """The JSON document of an evaluation: ``foldcorr.score/2`` or, multilabel, ``MULTILABEL_SCHEMA``.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> doc = score_dict(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])))
    >>> doc["schema"], doc["n"], round(doc["pooled"]["rk"], 6), doc["folds"]
    ('foldcorr.score/2', 12, 0.478091, [])
    >>> from foldcorr.tensor import multilabel_tally
    >>> ml = score_dict(evaluate(multilabel_tally([[1, 0], [0, 1]], [[1, 0], [1, 1]],
    ...                                            labels=["gull", "tern"])))
    >>> ml["schema"], ml["labels"], [r["label"] for r in ml["per_label"]]
    ('foldcorr.multilabel/1', ['gull', 'tern'], ['gull', 'tern'])
    """
    if ev.kind == MULTILABEL:
        doc = {
            "schema": MULTILABEL_SCHEMA,
            "source": ev.tensor.attrs.get("source"),
            "undefined": ev.undefined,
            "labels": ev.labels,
            "n": ev.n,
            **pooled_figures(ev),
            "per_label": row_entries(ev),
            "folds": fold_rows(ev),
            "warnings": list(ev.warnings),
        }
    else:
        summary = None
        if ev.fold_summary is not None:
            s = ev.fold_summary
            summary = {"count": s.count, "mean_rk": s.mean_rk, "sd_rk": s.sd_rk,
                       "min_rk": s.min_rk, "max_rk": s.max_rk}
        doc = {
            "schema": SCORE_SCHEMA,
            "source": ev.tensor.attrs.get("source"),
            "n": ev.n,
            "classes": ev.classes,
            "undefined": ev.undefined,
            "pooled": pooled_figures(ev),
            "folds": fold_rows(ev),
            "fold_summary": summary,
            "per_class": row_entries(ev),
            "warnings": list(ev.warnings),
        }
    for add in hooks(ev, "json"):
        add(ev, doc)
    return plain(doc)


def dumps(doc: dict) -> str:
    """Serialise a document: indented, UTF-8 text, strict JSON (no NaN).

    Examples
    --------
    >>> dumps({"a": 1})
    '{\\n  "a": 1\\n}\\n'
    """
    return json.dumps(plain(doc), indent=2, ensure_ascii=False, allow_nan=False) + "\n"

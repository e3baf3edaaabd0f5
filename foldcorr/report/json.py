"""JSON rendering: the versioned contract other programs rely on.

``foldcorr.score/1`` keys: ``schema``, ``source``, ``n``, ``classes``,
``undefined``, ``pooled``, ``folds``, ``fold_summary``, ``per_class`` and
``warnings`` (see ``docs/json.md``). Undefined values are ``null`` under the
``nan`` convention; non-finite numbers are never written.
"""

from __future__ import annotations

import json
import math

import numpy as np

from foldcorr.evaluation import Evaluation
from foldcorr.report.sections import hooks

__all__ = ["SCORE_SCHEMA", "score_dict", "dumps", "plain"]

SCORE_SCHEMA = "foldcorr.score/1"

POOLED_KEYS = ("rk", "accuracy", "balanced_accuracy", "kappa", "macro_f1", "macro_mcc",
               "marginal_mismatch")
CLASS_KEYS = ("support", "predicted", "mcc", "weight", "contribution", "drag", "recall",
              "precision", "f1")


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


def score_dict(ev: Evaluation) -> dict:
    """The ``foldcorr.score/1`` document of an evaluation.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> doc = score_dict(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])))
    >>> doc["schema"], doc["n"], round(doc["pooled"]["rk"], 6), doc["folds"]
    ('foldcorr.score/1', 12, 0.478091, [])
    """
    pooled = {k: ev.figure(k) for k in POOLED_KEYS}
    folds = []
    if ev.folds is not None:
        f = ev.folds
        for i, fold in enumerate(f.coords["fold"].values):
            folds.append({"fold": fold, "n": f["n"].values[i], "rk": f["rk"].values[i],
                          "accuracy": f["accuracy"].values[i]})
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
        "pooled": pooled,
        "folds": folds,
        "fold_summary": summary,
        "per_class": _per_class(ev),
        "warnings": list(ev.warnings),
    }
    for add in hooks(ev, "json"):
        add(ev, doc)
    return plain(doc)


def _per_class(ev: Evaluation) -> list[dict]:
    d = ev.by_drag()
    rows = []
    for i, label in enumerate(d.coords["class"].values):
        row = {"class": label, **{k: d[k].values[i] for k in CLASS_KEYS}}
        confusion = d["top_confusion"].values[i]
        row["top_confusion"] = None if d["top_confusion_count"].values[i] == 0 else {
            "predicted": confusion, "count": d["top_confusion_count"].values[i]}
        rows.append(row)
    return rows


def dumps(doc: dict) -> str:
    """Serialise a document: indented, UTF-8 text, strict JSON (no NaN).

    Examples
    --------
    >>> dumps({"a": 1})
    '{\\n  "a": 1\\n}\\n'
    """
    return json.dumps(plain(doc), indent=2, ensure_ascii=False, allow_nan=False) + "\n"

"""Report section ``shifted``: figures at a target prevalence beside the observed ones.

Hooks (see :mod:`foldcorr.report.sections`): ``tables`` shows observed and
shifted pooled figures side by side and the per-class figures at the target;
``json`` adds ``shifted`` {``prevalence``, ``rk``, ``pooled``, ``per_class``}.
"""

from __future__ import annotations

from foldcorr.report.tables import Column, Table

__all__ = ["tables", "json"]

NAMES = {"rk": "R_K", "accuracy": "accuracy", "balanced_accuracy": "balanced accuracy",
         "kappa": "Cohen's kappa", "macro_f1": "macro F1", "macro_mcc": "macro one-vs-rest MCC"}


def _py(value):
    return value.item() if hasattr(value, "item") else value


def tables(ev, top):
    """Observed and shifted pooled figures, and per-class figures at the target.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.analysis.shift import shifted_figures
    >>> t = confusion_tensor([[80, 20], [1, 9]], ["cod", "hake"])
    >>> ev = evaluate(t).with_extra("shifted", shifted_figures(t, "uniform"))
    >>> [x.title[:30] for x in tables(ev, 20)]
    ['At the target prevalence (labe', 'Classes at the target prevalen']
    """
    r = ev.extras["shifted"]
    pooled = Table(
        "At the target prevalence (label shift)",
        (Column("figure", "label"), Column("observed", "correlation"),
         Column("at target", "correlation")),
        tuple((label, ev.figure(key), float(r.pooled[key])) for key, label in NAMES.items()),
        "rows reweighted to the target prevalence, keeping each class's predictions as observed "
        "(label shift); see docs/shift.md for when that holds",
    )
    p = r.per_class
    classes = p.coords["class"].values.tolist()
    observed_mcc = dict(zip(ev.per_class.coords["class"].values.tolist(),
                            ev.per_class["mcc"].values.tolist()))
    change = [abs(float(p["mcc"].values[i]) - (observed_mcc.get(c) or 0.0))
              for i, c in enumerate(classes)]
    order = sorted(range(len(classes)), key=lambda i: (-change[i], i))
    shown = order if top is None else order[:top]
    observed_precision = dict(zip(ev.per_class.coords["class"].values.tolist(),
                                  ev.per_class["precision"].values.tolist()))
    rows = tuple((classes[i], float(r.observed.values[i]), float(r.prevalence.values[i]),
                  observed_mcc.get(classes[i]), float(p["mcc"].values[i]),
                  observed_precision.get(classes[i]), float(p["precision"].values[i]),
                  float(p["recall"].values[i]))
                 for i in shown)
    note = "" if len(shown) == len(classes) else \
        f"{len(classes) - len(shown)} more classes not shown (use --top all)"
    per_class = Table(
        "Classes at the target prevalence (largest change in MCC first)",
        (Column("class", "label"), Column("share obs."), Column("share target"),
         Column("MCC obs.", "correlation"), Column("MCC target", "correlation"),
         Column("prec. obs."), Column("prec. target"), Column("recall")),
        rows, note)
    return [pooled, per_class]


def json(ev, doc) -> None:
    """Add ``shifted`` to a ``foldcorr.score/2`` document.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.analysis.shift import shifted_figures
    >>> t = confusion_tensor([[80, 20], [1, 9]], ["cod", "hake"])
    >>> doc = {}
    >>> json(evaluate(t).with_extra("shifted", shifted_figures(t, "uniform")), doc)
    >>> doc["shifted"]["prevalence"], round(doc["shifted"]["rk"], 4)
    ({'cod': 0.5, 'hake': 0.5}, 0.7035)
    """
    r = ev.extras["shifted"]
    classes = r.prevalence.coords["class"].values.tolist()
    p = r.per_class
    doc["shifted"] = {
        "prevalence": dict(zip(classes, r.prevalence.values.tolist())),
        "rk": r.rk,
        "pooled": {key: float(r.pooled[key]) for key in NAMES},
        "per_class": [
            {"class": c, "observed_prevalence": float(r.observed.values[i]),
             "prevalence": float(r.prevalence.values[i]), "mcc": float(p["mcc"].values[i]),
             "recall": float(p["recall"].values[i]), "precision": float(p["precision"].values[i]),
             "f1": float(p["f1"].values[i])}
            for i, c in enumerate(classes)
        ],
    }

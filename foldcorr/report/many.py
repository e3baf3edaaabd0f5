"""Report of ``foldcorr compare`` with three or more models: text, Markdown, HTML and the
``foldcorr.compare/2`` JSON.

The renderers take a :class:`foldcorr.analysis.many.ManyComparison` and never compute.
"""

from __future__ import annotations

from foldcorr.report.json import plain
from foldcorr.report.tables import Column, Report, Table, format_interval, format_p, format_value
from foldcorr.report.uncertainty import percent

__all__ = ["MANY_SCHEMA", "many_report", "many_dict", "many_document"]

MANY_SCHEMA = "foldcorr.compare/2"


def _py(value):
    return value.item() if hasattr(value, "item") else value


def _verdict(mc) -> str:
    tied = [m for m in mc.tied if m != mc.best]
    if not tied:
        return f"{mc.best} is best; the data separate it from every other model"
    return (f"{mc.best} has the highest R_K, but the data cannot separate it from "
            f"{', '.join(tied)}")


def many_report(mc, *, top: int | None = 20, source: str | None = None) -> Report:
    """The comparison of many models as a :class:`~foldcorr.report.tables.Report`.

    Examples
    --------
    >>> import numpy as np
    >>> from foldcorr.analysis.many import compare_many
    >>> y = np.array([0, 1, 2] * 50)
    >>> mc = compare_many(y, {"a": y, "b": np.roll(y, 1), "c": np.r_[y[:-9], y[-9:][::-1]]},
    ...                   n_resamples=200, seed=0)
    >>> [t.title for t in many_report(mc).tables]
    ['Models ranked by R_K', 'Class winners (top 3 of 3)']
    """
    lvl = percent(mc.level)
    r = mc.ranking
    models = [str(_py(m)) for m in r.coords["model"].values]
    facts = (("source", source or "(in memory)"), ("samples", format_value(mc.n, "count")),
             ("models", str(len(models))), ("best", str(mc.best)), ("verdict", _verdict(mc)))
    if mc.n_clusters is not None:
        effects = [float(v) for v in r["design_effect"].values if v == v]  # NaN != NaN
        spread = (f" (design effect of each model's R_K {min(effects):.2f} to "
                  f"{max(effects):.2f})" if effects else "")
        facts += (("clusters", f"{mc.n_clusters}{spread}"),)
    rows = tuple(
        (name, float(r["rk"].values[i]), format_interval(r["low"].values[i], r["high"].values[i]))
        + ((0.0, "", "", "(best)") if name == str(mc.best) else
           (float(r["gap"].values[i]),
            format_interval(r["gap_low"].values[i], r["gap_high"].values[i]),
            format_p(r["p_adjusted"].values[i]), "yes" if bool(r["separated"].values[i]) else "no"))
        for i, name in enumerate(models))
    ranking = Table(
        "Models ranked by R_K",
        (Column("model", "label"), Column("R_K", "correlation"), Column(f"{lvl} CI", "text"),
         Column("gap to best"), Column(f"{lvl} CI of gap", "text"),
         Column("adjusted p", "text"), Column("separated", "text")),
        rows,
        note=f"gap = R_K of {mc.best} minus R_K of the model, paired bootstrap interval; "
             f"p = sign-flip permutation test against {mc.best} (exchangeable predictions), "
             f"adjusted: {mc.adjustment}")
    tables = [ranking, _winners(mc, top, lvl)]
    if mc.per_fold is not None:
        pf = mc.per_fold
        folds = [_py(f) for f in pf.coords["fold"].values]
        fold_models = [str(_py(m)) for m in pf.coords["model"].values]
        tables.append(Table(
            "R_K per fold", (Column("fold", "label"),
                             *(Column(m, "correlation") for m in fold_models)),
            tuple((fold, *(float(pf.sel(model=m).values[j]) for m in fold_models))
                  for j, fold in enumerate(folds))))
    return Report("foldcorr compare", facts, tuple(tables), mc.warnings)


def _winners(mc, top, lvl) -> Table:
    pc = mc.per_class
    classes = [_py(c) for c in pc.coords["class"].values]
    k = len(classes)
    shown = k if top is None else min(top, k)
    order = sorted(range(k), key=lambda i: (not bool(pc["told"].values[i]),
                                            -abs(float(pc["margin"].values[i]) or 0.0)))
    rows = tuple(
        (classes[i], str(_py(pc["winner"].values[i])), str(_py(pc["runner_up"].values[i])),
         float(pc["margin"].values[i]), format_interval(pc["low"].values[i], pc["high"].values[i]),
         "yes" if bool(pc["told"].values[i]) else "no")
        for i in order[:shown])
    return Table(
        f"Class winners (top {shown} of {k})",
        (Column("class", "label"), Column("winner", "text"), Column("runner-up", "text"),
         Column("margin"), Column(f"{lvl} CI", "text"), Column("data tell", "text")),
        rows, "" if shown == k else f"{k - shown} more classes not shown")


def many_dict(mc, *, source: str | None = None) -> dict:
    """The ``foldcorr.compare/2`` document: every model, class and fold.

    Examples
    --------
    >>> import numpy as np
    >>> from foldcorr.analysis.many import compare_many
    >>> y = np.array([0, 1, 2] * 50)
    >>> mc = compare_many(y, {"a": y, "b": np.roll(y, 1), "c": np.r_[y[:-9], y[-9:][::-1]]},
    ...                   n_resamples=200, seed=0)
    >>> doc = many_dict(mc)
    >>> doc["schema"], doc["best"], [m["model"] for m in doc["models"]]
    ('foldcorr.compare/2', 'a', ['a', 'c', 'b'])
    """
    r, pc = mc.ranking, mc.per_class
    keys = [k for k in ("rk", "low", "high", "gap", "gap_low", "gap_high", "p_value",
                        "p_adjusted", "separated", "design_effect") if k in r]
    models = [{"model": _py(m), **{k: _py(r[k].values[i]) for k in keys}}
              for i, m in enumerate(r.coords["model"].values)]
    classes = [{"class": _py(c), **{k: _py(pc[k].values[i]) for k in
                                     ("winner", "runner_up", "margin", "low", "high", "told")},
                "mcc": {str(_py(m)): _py(pc["mcc"].sel(model=m).values[i])
                        for m in pc.coords["model"].values}}
               for i, c in enumerate(pc.coords["class"].values)]
    folds = None
    if mc.per_fold is not None:
        pf = mc.per_fold
        folds = [{"fold": _py(f), "rk": {str(_py(m)): _py(pf.sel(model=m).values[j])
                                         for m in pf.coords["model"].values}}
                 for j, f in enumerate(pf.coords["fold"].values)]
    return plain({"schema": MANY_SCHEMA, "source": source, "n": mc.n, "level": mc.level,
                  "best": mc.best, "tied": list(mc.tied), "adjustment": mc.adjustment,
                  "n_clusters": mc.n_clusters, "n_resamples": mc.n_resamples,
                  "n_permutations": mc.n_permutations, "seed": mc.seed, "models": models,
                  "per_class": classes, "folds": folds, "warnings": list(mc.warnings)})


def many_document(mc, *, top: int | None = 20, source: str | None = None):
    """The :class:`~foldcorr.report.documents.Document` of a comparison of many models.

    Examples
    --------
    >>> import numpy as np
    >>> from foldcorr.analysis.many import compare_many
    >>> from foldcorr.report import render
    >>> y = np.array([0, 1, 2] * 50)
    >>> mc = compare_many(y, {"a": y, "b": np.roll(y, 1), "c": np.r_[y[:-9], y[-9:][::-1]]},
    ...                   n_resamples=200, seed=0)
    >>> render(mc, "markdown").splitlines()[0]
    '## foldcorr compare'
    """
    from foldcorr.report.documents import Document

    return Document(many_report(mc, top=top, source=source),
                    lambda: many_dict(mc, source=source))

"""Report section ``uncertainty``: bootstrap intervals and fold statistics.

Shown when an evaluation carries ``ev.extras["uncertainty"]``, an
:class:`foldcorr.analysis.uncertainty.Uncertainty` (``foldcorr score --ci LEVEL``).
Adds an interval beside pooled R_K, an interval column to the fold table, a
per-class interval table, a fold statistics table, and the JSON keys
``pooled.rk_ci``, ``folds[].rk_ci``, ``per_class[].mcc_ci``, ``per_class[].drag_ci``,
``fold_summary.corrected_ci`` and ``ci``.
"""

from __future__ import annotations

from foldcorr.report.tables import Column, Table, format_value

__all__ = ["KEY", "percent", "summary_notes", "fold_columns", "tables", "json"]

KEY = "uncertainty"


def percent(level: float) -> str:
    """A level as a percentage label.

    Examples
    --------
    >>> percent(0.95), percent(0.975)
    ('95%', '97.5%')
    """
    return f"{level * 100:g}%"


def _pair(low, high) -> list:
    return [float(low), float(high)]


def _span(low, high) -> str:
    return f"{format_value(float(low), 'metric')} to {format_value(float(high), 'metric')}"


def summary_notes(ev) -> dict:
    """The pooled R_K interval, as text beside R_K."""
    u = ev.extras[KEY]
    r = u.rk
    how = f"{u.method}, {u.n_resamples} resamples"
    if getattr(u, "n_clusters", None) is not None:
        how += f", {u.n_clusters} clusters, design effect {u.design_effect:.2f}"
    return {"rk": f"{percent(u.level)} CI {_span(r.low, r.high)} ({how})"}


def fold_columns(ev) -> list:
    """One interval column in the fold table."""
    u = ev.extras[KEY]
    if u.fold_rk is None or ev.folds is None:
        return []
    values = [_span(u.fold_rk.low.sel(fold=f), u.fold_rk.high.sel(fold=f))
              for f in ev.folds.coords["fold"].values]
    return [(Column(f"R_K {percent(u.level)} CI", "text"), values)]


def _by_class(res) -> dict:
    return {label.item() if hasattr(label, "item") else label: _span(lo, hi)
            for label, lo, hi in zip(res.low.coords["class"].values, res.low.values,
                                     res.high.values)}


def tables(ev, top) -> list:
    """Per-class intervals (classes in the class table's order) and fold statistics."""
    u = ev.extras[KEY]
    order = [_py(c) for c in ev.by_drag().coords["class"].values]
    shown = order if top is None else order[:top]
    mcc, drag = _by_class(u.mcc), _by_class(u.drag)
    rows = tuple((c, float(u.mcc.estimate.sel({"class": c})), mcc[c],
                  float(u.drag.estimate.sel({"class": c})), drag[c]) for c in shown)
    lvl = percent(u.level)
    out = [Table(f"Class intervals (top {len(shown)} of {len(order)} by shortfall share)",
                 (Column("class", "label"), Column("MCC", "correlation"),
                  Column(f"MCC {lvl} CI", "label"), Column("drag"),
                  Column(f"drag {lvl} CI", "label")), rows,
                 "" if len(shown) == len(order) else
                 f"{len(order) - len(shown)} more classes not shown (use --top all)")]
    f = u.folds
    if f is None:
        return out
    rows = (
        ("folds", str(f.count)),
        ("pooled R_K", format_value(f.pooled, "metric")),
        ("averaged R_K (mean of folds)", format_value(f.mean, "metric")),
        ("pooled - averaged", format_value(f.gap, "metric")),
        ("sd of fold R_K", format_value(f.sd, "metric")),
        ("min / max of fold R_K", f"{format_value(f.min, 'metric')} / "
                                  f"{format_value(f.max, 'metric')}"),
        (f"{percent(f.level)} t interval of the mean, corrected",
         _span(*f.corrected_ci)),
        (f"{percent(f.level)} t interval of the mean, naive", _span(*f.naive_ci)),
    )
    note = (f"corrected variance (1/J + n_test/n_train) s^2 with n_test/n_train = "
            f"{f.test_train_ratio:.3g} (Nadeau and Bengio 2003); the naive interval ignores "
            "that training sets overlap")
    out.append(Table("Fold statistics", (Column("figure", "label"), Column("value", "text")),
                     rows, note))
    return out


def _py(value):
    return value.item() if hasattr(value, "item") else value


def json(ev, doc) -> None:
    """Add the interval keys to a ``foldcorr.score/2`` document."""
    u = ev.extras[KEY]
    doc["pooled"]["rk_ci"] = _pair(u.rk.low, u.rk.high)
    for entry in doc.get("folds") or []:
        if u.fold_rk is not None:
            sel = {"fold": entry["fold"]}
            entry["rk_ci"] = _pair(u.fold_rk.low.sel(sel), u.fold_rk.high.sel(sel))
    for entry in doc.get("per_class") or []:
        sel = {"class": entry["class"]}
        entry["mcc_ci"] = _pair(u.mcc.low.sel(sel), u.mcc.high.sel(sel))
        entry["drag_ci"] = _pair(u.drag.low.sel(sel), u.drag.high.sel(sel))
    if doc.get("fold_summary") is not None:
        f = u.folds
        doc["fold_summary"].update({
            "corrected_ci": None if f is None else list(f.corrected_ci),
            "naive_ci": None if f is None else list(f.naive_ci),
            "corrected_se": None if f is None else f.corrected_se,
            "test_train_ratio": None if f is None else f.test_train_ratio,
            "pooled_rk": None if f is None else f.pooled,
            "averaged_rk": None if f is None else f.mean,
        })
    doc["ci"] = {"level": u.level, "method": u.method, "resamples": u.n_resamples,
                 "seed": u.seed, "clusters": getattr(u, "n_clusters", None),
                 "design_effect": getattr(u, "design_effect", None)}

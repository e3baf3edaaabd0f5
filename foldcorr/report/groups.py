"""The class-groups section of a score report (extras key ``groups``).

One table of the levels (group-level R_K, the split of 1 - R_K into
confusions inside and between groups) and, per level, the groups ranked by
their share of 1 - R_K with the class-table figures of the merged tensor.
"""

from __future__ import annotations

from foldcorr.report.tables import Column, Table, format_interval

__all__ = ["KEY", "tables", "json", "levels_table", "level_table", "GROUP_FIGURES"]

#: Extras key of this section.
KEY = "groups"

#: Figures of the merged (group-level) class table shown per group, in order.
GROUP_FIGURES = ("in_truth", "predicted", "mcc", "recall", "precision", "flags",
                 "top_confusion")


def _py(value):
    return value.item() if hasattr(value, "item") else value


def _interval_text(level) -> str:
    res = level.interval
    if res is None:
        return ""
    return format_interval(res.low, res.high)


def levels_table(ev) -> Table:
    """One row per level: groups, group-level R_K, and 1 - R_K inside and between groups.

    Examples
    --------
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.pipeline.groups import evaluate_groups
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 1, 0], [2, 4, 1], [0, 1, 6]], ["cat", "lynx", "dog"])
    >>> ev = evaluate(t)
    >>> ev = ev.with_extra("groups", evaluate_groups(ev, {"cat": "f", "lynx": "f", "dog": "c"}))
    >>> levels_table(ev).cells()[0][:3]
    ['group', '2', '0.780']
    """
    result = ev.extras[KEY]
    with_ci = any(level.interval is not None for level in result.levels)
    columns = (Column("level", "label"), Column("groups", "count"),
               Column("R_K of groups", "correlation"),
               *((Column("interval", "text"),) if with_ci else ()),
               Column("inside groups"), Column("between groups"), Column("inside %", "text"))
    rows = []
    for level in result.levels:
        inside, between = float(level.split.inside), float(level.split.between)
        total = inside + between
        share = f"{100 * inside / total:.0f}%" if total > 0 else "n/a"
        rows.append((level.name, len(level.shares), level.rk,
                     *((_interval_text(level),) if with_ci else ()), inside, between, share))
    note = (f"class-level R_K {ev.rk:.3f}; inside + between = 1 - R_K = {1 - ev.rk:.3f}: the "
            "Shapley split of the gain from repairing every confusion inside groups and every "
            "confusion between them (docs/decomposition.md)")
    if result.other is not None:
        note += f"; classes missing from the groups are in {result.other!r}"
    return Table("Class groups", columns, tuple(rows), note)


def level_table(ev, level, top: int | None = 20) -> Table:
    """The groups of one level, by their share of 1 - R_K, with the group-level figures.

    Examples
    --------
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.pipeline.groups import evaluate_groups
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 1, 0], [2, 4, 1], [0, 1, 6]], ["cat", "lynx", "dog"])
    >>> ev = evaluate(t)
    >>> ev = ev.with_extra("groups", evaluate_groups(ev, {"cat": "f", "lynx": "f", "dog": "c"}))
    >>> [row[:2] for row in level_table(ev, ev.extras["groups"].levels[0]).rows]
    [('f', 2), ('c', 1)]
    """
    from foldcorr.report.tables import figure_cell, figure_column

    group_ev = level.evaluation
    figures = [f for f in group_ev.figures("class") if f.key in GROUP_FIGURES]
    per_group = group_ev.per_class
    index = {_py(g): i for i, g in enumerate(per_group.coords["class"].values)}
    members = _members(ev, level)
    groups = [_py(g) for g in level.shares.coords["group"].values]
    shown = groups if top is None else groups[:top]
    rows = []
    for g in shown:
        i = index[g]
        rows.append((g, members.get(g, 0), float(level.shares.sel(group=g)),
                     *(figure_cell(per_group, i, f) for f in figures)))
    columns = (Column("group", "label"), Column("classes", "count"), Column("share of 1 - R_K"),
               *(figure_column(f) for f in figures))
    note = ("share: the shortfall shares of the group's classes added up (they add up to "
            "1 - R_K); the other figures are those of the tensor merged by group")
    if len(shown) < len(groups):
        note += f"; {len(groups) - len(shown)} more groups not shown (use --top all)"
    return Table(f"Groups ({level.name}) by share of 1 - R_K", columns, tuple(rows), note)


def _members(ev, level) -> dict:
    return {g: len(classes) for g, classes in level.members.items()}


def tables(ev, top: int | None = 20) -> list:
    """The levels table and one table of groups per level.

    Examples
    --------
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.pipeline.groups import evaluate_groups
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 1, 0], [2, 4, 1], [0, 1, 6]], ["cat", "lynx", "dog"])
    >>> ev = evaluate(t)
    >>> ev = ev.with_extra("groups", evaluate_groups(ev, {"cat": "f", "lynx": "f", "dog": "c"}))
    >>> [table.title for table in tables(ev)]
    ['Class groups', 'Groups (group) by share of 1 - R_K']
    """
    result = ev.extras[KEY]
    return [levels_table(ev), *(level_table(ev, level, top) for level in result.levels)]


def json(ev, doc: dict) -> None:
    """Add ``groups``: one entry per level (see docs/json.md).

    Examples
    --------
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.pipeline.groups import evaluate_groups
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 1, 0], [2, 4, 1], [0, 1, 6]], ["cat", "lynx", "dog"])
    >>> ev = evaluate(t)
    >>> ev = ev.with_extra("groups", evaluate_groups(ev, {"cat": "f", "lynx": "f", "dog": "c"}))
    >>> doc = {}
    >>> json(ev, doc)
    >>> [g["group"] for g in doc["groups"][0]["groups"]], round(doc["groups"][0]["rk"], 4)
    (['f', 'c'], 0.7802)
    """
    out = []
    for level in ev.extras[KEY].levels:
        group_ev = level.evaluation
        per_group = group_ev.per_class
        index = {_py(g): i for i, g in enumerate(per_group.coords["class"].values)}
        members = _members(ev, level)
        entry = {
            "level": level.name,
            "rk": _number(level.rk),
            "inside": _number(level.split.inside),
            "between": _number(level.split.between),
            "rk_fix_inside": _number(level.split.rk_fix_inside),
            "rk_fix_between": _number(level.split.rk_fix_between),
            "groups": [],
        }
        if level.interval is not None:
            entry["rk_interval"] = [_number(level.interval.low), _number(level.interval.high)]
        if level.fold_split is not None:
            fs = level.fold_split
            entry["folds"] = [
                {"fold": _py(f), "rk": _number(group_ev.folds["rk"].values[i]),
                 "inside": _number(fs.inside.values[i]), "between": _number(fs.between.values[i])}
                for i, f in enumerate(fs.coords["fold"].values)]
        for g in level.shares.coords["group"].values:
            g = _py(g)
            i = index[g]
            item = {"group": g, "classes": members.get(g, 0),
                    "share": _number(level.shares.sel(group=g))}
            for key in ("in_truth", "predicted", "mcc", "recall", "precision", "f1",
                        "shortfall_share"):
                item[f"{key}" if key != "shortfall_share" else "group_shortfall_share"] = \
                    _number(per_group[key].values[i])
            entry["groups"].append(item)
        out.append(entry)
    doc["groups"] = out


def _number(value):
    v = float(value)
    if v != v:
        return None
    return int(v) if v.is_integer() and abs(v) < 2**53 else v

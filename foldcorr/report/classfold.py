"""Class by fold in a score report: each top class's MCC and shortfall share in every fold.

Shown for multiclass evaluations with folds (``Evaluation.per_class_fold``,
from :func:`foldcorr.analysis.classfold.class_by_fold`): a compact table of the
first classes of the class table, the JSON key ``per_class_fold``, and the
``fold ranks`` column of the class table, which says whether a class's rank
holds from fold to fold (``steady``) or jumps (``moves``).
"""

from __future__ import annotations

from foldcorr.report.tables import Column, Table

__all__ = ["MAX_ROWS", "class_fold_table", "rank_column", "json", "rank_text"]

#: The class-by-fold table shows at most this many classes (the first of the class table).
MAX_ROWS = 10


def _py(value):
    return value.item() if hasattr(value, "item") else value


def rank_text(best: int, worst: int, moves: bool) -> str:
    """The ``fold ranks`` cell: best to worst rank over the folds and whether the class moves.

    Examples
    --------
    >>> rank_text(1, 2, False), rank_text(2, 9, True)
    ('1-2 steady', '2-9 moves')
    """
    span = f"{best}" if best == worst else f"{best}-{worst}"
    return f"{span} {'moves' if moves else 'steady'}"


def rank_column(ev) -> list:
    """The ``fold ranks`` column of the class table, values keyed by class (empty without folds).

    Examples
    --------
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.tensor import tally
    >>> t = tally(list("aabbcc") * 2, list("abbbca") + list("aabcbc"), folds=[1] * 6 + [2] * 6)
    >>> [(c.title, v) for c, v in rank_column(evaluate(t))]
    [('fold ranks', {'a': '1-3 steady', 'b': '2 steady', 'c': '2-3 steady'})]
    """
    cf = ev.per_class_fold
    if cf is None:
        return []
    values = {_py(c): rank_text(int(b), int(w), bool(m)) for c, b, w, m in zip(
        cf.coords["class"].values, cf.rank_best.values, cf.rank_worst.values, cf.moves.values)}
    return [(Column("fold ranks", "text"), values)]


def class_fold_table(ev, top: int | None = 20) -> Table | None:
    """MCC and shortfall share of the first classes of the class table, one column per fold.

    Examples
    --------
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.tensor import tally
    >>> t = tally(list("aabbcc") * 2, list("abbbca") + list("aabcbc"), folds=[1] * 6 + [2] * 6)
    >>> class_fold_table(evaluate(t)).cells()[0]
    ['b', '0.71 / .110', '0.25 / .250', '2 steady']
    """
    cf = ev.per_class_fold
    if cf is None:
        return None
    order = [_py(c) for c in ev.ranked().coords["class"].values]
    limit = MAX_ROWS if top is None else min(top, MAX_ROWS)
    shown = order[:limit]
    folds = [_py(f) for f in cf.coords["fold"].values]
    rows = []
    for c in shown:
        one = cf.sel({"class": c})
        cells = [f"{round(float(mcc), 2) + 0.0:.2f} / {_share(float(sh))}"
                 for mcc, sh in zip(one.mcc.values, one.shortfall_share.values)]
        rows.append((c, *cells, rank_text(int(one.rank_best), int(one.rank_worst),
                                          bool(one.moves))))
    columns = (Column("class", "label"), *(Column(f"fold {f}", "text") for f in folds),
               Column("fold ranks", "text"))
    from foldcorr.analysis.classfold import move_spread

    note = ("each fold: one-vs-rest MCC / shortfall share of that fold's 1 - R_K; fold ranks: "
            "the class's best to worst rank by shortfall share over the folds, 'moves' when they "
            f"lie {move_spread(len(order))} or more places apart (a noisy problem rather than a "
            "stable one)")
    return Table(f"Per fold: the first {len(shown)} classes of the class table", columns,
                 tuple(rows), note)


def _share(value: float) -> str:
    text = f"{value:.3f}"
    return text[1:] if text.startswith("0.") else text


def json(ev, doc: dict) -> None:
    """Add ``per_class_fold``: every class, in class-table order (see docs/json.md).

    Examples
    --------
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.tensor import tally
    >>> t = tally(list("aabbcc") * 2, list("abbbca") + list("aabcbc"), folds=[1] * 6 + [2] * 6)
    >>> doc = {}
    >>> json(evaluate(t), doc)
    >>> [(e["class"], e["rank_best"], e["rank_worst"]) for e in doc["per_class_fold"]]
    [('b', 2, 2), ('c', 2, 3), ('a', 1, 3)]
    """
    cf = ev.per_class_fold
    if cf is None:
        return
    folds = [_py(f) for f in cf.coords["fold"].values]
    out = []
    for c in ev.ranked().coords["class"].values:
        one = cf.sel({"class": c})
        out.append({
            "class": _py(c), "rank_best": int(one.rank_best), "rank_worst": int(one.rank_worst),
            "moves": bool(one.moves),
            "folds": [{"fold": f, "mcc": _number(m), "shortfall_share": _number(s),
                       "rank": int(r)}
                      for f, m, s, r in zip(folds, one.mcc.values, one.shortfall_share.values,
                                            one["rank"].values)],
        })
    doc["per_class_fold"] = out


def _number(value):
    v = float(value)
    return None if v != v else v

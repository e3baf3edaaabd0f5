"""Class groups of an evaluation: every figure at each level of groups, and where 1 - R_K comes from.

:func:`evaluate_groups` merges the classes of an evaluation's tensor by each
level of groups (:func:`foldcorr.analysis.groups.merge_classes`), evaluates the
merged tensor like any other (R_K, the class-table figures, folds), splits the
class-level 1 - R_K into confusions inside and between the groups of that
level (:func:`foldcorr.analysis.groups.group_split`), ranks the groups by their
share of 1 - R_K, and with a level of intervals bootstraps the group-level R_K.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import xarray as xr

if TYPE_CHECKING:
    from foldcorr.evaluation import Evaluation

__all__ = ["GroupLevel", "ClassGroups", "evaluate_groups"]


@dataclass(frozen=True)
class GroupLevel:
    """One level of class groups.

    Attributes
    ----------
    name : str
        The level (the column of the groups file, e.g. ``"genus"``).
    evaluation : foldcorr.Evaluation
        The evaluation of the tensor merged by group: its ``rk`` is the
        group-level R_K, its class table is one row per group.
    split : xarray.Dataset
        :func:`foldcorr.analysis.groups.group_split` of the class-level
        tensor pooled over folds (``inside`` + ``between`` = 1 - R_K).
    fold_split : xarray.Dataset or None
        The same per fold (dim ``fold``), or None without folds.
    shares : xarray.DataArray
        Dim ``group``, sorted largest first: each group's share of the
        class-level 1 - R_K (its classes' shortfall shares added up).
    members : dict
        Group -> its classes, in tensor order.
    interval : foldcorr.BootstrapResult or None
        Bootstrap interval of the group-level R_K, when intervals were asked for.
    """

    name: str
    evaluation: object
    split: xr.Dataset
    fold_split: xr.Dataset | None
    shares: xr.DataArray
    members: dict
    interval: object = None

    @property
    def rk(self) -> float:
        """Group-level R_K (pooled over folds).

        Examples
        --------
        >>> from foldcorr.evaluation import evaluate
        >>> from foldcorr.tensor import confusion_tensor
        >>> ev = evaluate(confusion_tensor([[5, 1, 0], [2, 4, 1], [0, 1, 6]], ["a", "b", "c"]))
        >>> round(evaluate_groups(ev, {"a": 1, "b": 1, "c": 2}).levels[0].rk, 4)
        0.7802
        """
        return self.evaluation.rk


@dataclass(frozen=True)
class ClassGroups:
    """Every level of class groups of an evaluation, in the order of the groups file.

    Attributes
    ----------
    levels : tuple of GroupLevel
    other : str or None
        The group of the classes the groups left out, if one was named.
    warnings : tuple of str
        Undefined values met at the group levels.
    """

    levels: tuple
    other: str | None = None
    warnings: tuple = ()

    def level(self, name: str) -> GroupLevel:
        """One level by name.

        Raises
        ------
        KeyError
            When there is no such level.

        Examples
        --------
        >>> from foldcorr.evaluation import evaluate
        >>> from foldcorr.tensor import confusion_tensor
        >>> ev = evaluate(confusion_tensor([[5, 1, 0], [2, 4, 1], [0, 1, 6]], ["a", "b", "c"]))
        >>> evaluate_groups(ev, {"genus": {"a": 1, "b": 1, "c": 2}}).level("genus").members
        {1: ['a', 'b'], 2: ['c']}
        """
        for level in self.levels:
            if level.name == name:
                return level
        raise KeyError(f"no level of groups named {name!r}; levels are "
                       f"{[lv.name for lv in self.levels]!r}")


def evaluate_groups(ev: Evaluation, levels: Mapping, *, other: str | None = None,
                    intervals: dict | None = None) -> ClassGroups:
    """Evaluate an evaluation's tensor at each level of class groups.

    Parameters
    ----------
    ev : foldcorr.Evaluation
        A multiclass evaluation.
    levels : mapping
        Level name -> (class -> group); a mapping class -> group is one level
        named ``"group"``.
    other : str, optional
        The group of classes missing from a level; without it they are an error.
    intervals : dict, optional
        Keyword arguments of :func:`foldcorr.analysis.uncertainty.bootstrap`
        (``level``, ``n_resamples``, ``method``, ``seed``): bootstrap the
        group-level R_K.

    Returns
    -------
    ClassGroups

    Raises
    ------
    InvalidInputError
        When classes are missing from a level and no ``other`` is given.

    Examples
    --------
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[5, 1, 0], [2, 4, 1], [0, 1, 6]], ["cat", "lynx", "dog"])
    >>> g = evaluate_groups(evaluate(t), {"cat": "felid", "lynx": "felid", "dog": "canid"})
    >>> lv = g.level("group")
    >>> round(lv.rk, 4), round(float(lv.split.inside), 4), lv.shares["group"].values.tolist()
    (0.7802, 0.2218, ['felid', 'canid'])
    """
    from foldcorr.analysis.groups import group_index, group_shares, group_split, merge_classes
    from foldcorr.errors import collect_undefined
    from foldcorr.evaluation import evaluate
    from foldcorr.tensor import FOLD, pool

    if not all(isinstance(v, Mapping) for v in levels.values()):
        levels = {"group": levels}
    notes: list[str] = []
    out = []
    pooled = pool(ev.tensor)
    for name, mapping in levels.items():
        merged = merge_classes(ev.tensor, mapping, other=other)
        group_ev = evaluate(merged, undefined=ev.undefined)
        notes.extend(f"groups ({name}): {w}" for w in group_ev.warnings)
        split = collect_undefined(notes, f"groups ({name})", lambda: group_split(
            pooled, mapping, other=other, undefined=ev.undefined))
        fold_split = None
        if FOLD in ev.tensor.dims:
            fold_split = collect_undefined(notes, f"groups ({name}) per fold", lambda: group_split(
                ev.tensor, mapping, other=other, undefined=ev.undefined))
        shares = group_shares(ev.per_class["shortfall_share"], mapping, other=other)
        shares = shares.isel(group=np.argsort(-shares.values, kind="stable"))
        interval = None
        if intervals:
            from foldcorr.analysis.uncertainty import bootstrap

            interval = collect_undefined(notes, f"groups ({name})", lambda: bootstrap(
                merged, **intervals))
        index, groups = group_index(ev.classes, mapping, other=other)
        members = {g: [c for c, i in zip(ev.classes, index) if i == k]
                   for k, g in enumerate(groups)}
        out.append(GroupLevel(str(name), group_ev, split, fold_split, shares, members, interval))
    return ClassGroups(tuple(out), other, tuple(dict.fromkeys(notes)))

"""Per-sample predictions with sample ids, kept beside a confusion tensor.

A confusion tensor is enough for every figure of one model, but a *paired*
comparison of two models needs to know which prediction of one model belongs
to which prediction of the other. :class:`Samples` holds one row per sample:
its id, its actual and predicted labels and its fold. It lives in the tensor
layer and computes nothing.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from foldcorr.errors import InvalidInputError

__all__ = ["Samples", "align_samples"]


@dataclass(frozen=True)
class Samples:
    """Per-sample labels keyed by a unique sample id.

    Attributes
    ----------
    ids : numpy.ndarray
        One unique id per sample (strings or integers).
    actual, predicted : numpy.ndarray
        Actual and predicted class labels, one per sample.
    fold : numpy.ndarray or None
        Fold label per sample, or None without folds.
    id_column : str
        Name of the column the ids came from.
    cluster : numpy.ndarray or None
        Cluster id per sample (samples of one cluster share their fate), or None.

    Examples
    --------
    >>> s = Samples.of(["s1", "s2"], ["a", "b"], ["a", "a"], id_column="image")
    >>> len(s), s.ids.tolist()
    (2, ['s1', 's2'])
    >>> Samples.of(["s1", "s1"], ["a", "b"], ["a", "a"], id_column="image")
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidInputError: id column 'image' must hold unique ids; 's1' appears 2 times (1 duplicated ids in all)
    """

    ids: np.ndarray
    actual: np.ndarray
    predicted: np.ndarray
    fold: np.ndarray | None
    id_column: str
    cluster: np.ndarray | None = None

    @classmethod
    def of(cls, ids, actual, predicted, fold=None, *, id_column: str = "id",
           cluster=None) -> Samples:
        """Validate and build: equal lengths, no missing and no repeated ids."""
        arrays = {"ids": _plain(ids), "actual": _plain(actual), "predicted": _plain(predicted)}
        for name, values in (("fold", fold), ("cluster", cluster)):
            if values is not None:
                arrays[name] = _plain(values)
        n = len(arrays["ids"])
        for name, values in arrays.items():
            if values.ndim != 1 or len(values) != n:
                raise InvalidInputError(
                    f"`{name}` must be one-dimensional with {n} values; got shape {values.shape!r}"
                )
        index = pd.Index(arrays["ids"])
        if index.hasnans:
            row = int(np.flatnonzero(pd.isna(arrays["ids"]))[0])
            raise InvalidInputError(f"id column {id_column!r} row {row + 1}: missing id")
        if index.has_duplicates:
            dup = index[index.duplicated()]
            first = dup[0]
            times = int((index == first).sum())
            raise InvalidInputError(
                f"id column {id_column!r} must hold unique ids; {_py(first)!r} appears "
                f"{times} times ({len(dup.unique())} duplicated ids in all)"
            )
        return cls(ids=arrays["ids"], actual=arrays["actual"], predicted=arrays["predicted"],
                   fold=arrays.get("fold"), id_column=id_column, cluster=arrays.get("cluster"))

    def __len__(self) -> int:
        return len(self.ids)


def align_samples(a: Samples, b: Samples):
    """Match two sample sets by id; say why they cannot be paired if they cannot.

    Parameters
    ----------
    a, b : Samples
        The two sample sets (for instance a baseline and a new run).

    Returns
    -------
    tuple
        ``(order, reason)``: ``order`` is an index array putting ``b`` in the
        order of ``a`` (``b_aligned = b.predicted[order]``), or None when the
        two cannot be paired; ``reason`` is "" or a sentence saying why not.

    Notes
    -----
    Two sample sets pair when they hold the same ids and every id has the
    same actual label (and the same fold, when both have folds) in both.

    Examples
    --------
    >>> a = Samples.of(["x", "y"], ["p", "q"], ["p", "p"])
    >>> b = Samples.of(["y", "x"], ["q", "p"], ["q", "p"])
    >>> order, reason = align_samples(a, b)
    >>> order.tolist(), reason
    ([1, 0], '')
    >>> align_samples(a, Samples.of(["x", "z"], ["p", "q"], ["p", "q"]))[1]
    'the sample ids differ (1 only in the first, 1 only in the second)'
    """
    ia, ib = pd.Index(a.ids), pd.Index(b.ids)
    if len(ia) != len(ib) or not ia.isin(ib).all():
        only_a = int((~ia.isin(ib)).sum())
        only_b = int((~ib.isin(ia)).sum())
        return None, (f"the sample ids differ ({only_a} only in the first, "
                      f"{only_b} only in the second)")
    order = ib.get_indexer(ia)
    truth_b = b.actual[order]
    differ = int(np.sum(_as_text(a.actual) != _as_text(truth_b)))
    if differ:
        return None, f"the actual labels differ for {differ} of {len(ia)} sample ids"
    if a.fold is not None and b.fold is not None:
        moved = int(np.sum(_as_text(a.fold) != _as_text(b.fold[order])))
        if moved:
            return None, f"the folds differ for {moved} of {len(ia)} sample ids"
    return order, ""


def _as_text(values: np.ndarray) -> np.ndarray:
    return np.asarray([str(v) for v in values], dtype=object)


def _plain(values) -> np.ndarray:
    if isinstance(values, (pd.Series, pd.Index)):
        return values.to_numpy()
    return np.asarray(values)


def _py(value):
    return value.item() if isinstance(value, np.generic) else value

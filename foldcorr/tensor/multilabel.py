r"""The multilabel tensor kind: one 2 x 2 confusion tensor per label.

A multilabel tensor is an ordinary confusion tensor with K = 2 and a leading
``label`` dim: dims ``([fold,] "label", "actual", "predicted")`` with the
coordinates ``[False, True]`` on both class dims. This module counts indicator
matrices (or one label set per sample) into it; nothing here computes a metric.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr.errors import InvalidInputError
from foldcorr.tensor.dims import ACTUAL, COUNT, FOLD, LABEL, PREDICTED, validate_tensor

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

__all__ = ["BINARY", "multilabel_tally", "indicators_from_sets"]

#: Coordinates of both class dims of a multilabel tensor.
BINARY = [False, True]

# Cells counted per bincount call (bounds the int64 index array to ~128 MiB).
_CHUNK = 1 << 24


def indicators_from_sets(sets: Iterable, labels: Sequence | None = None, *,
                         name: str = "labels") -> tuple[np.ndarray, list]:
    """Turn one label set per sample into a boolean indicator matrix.

    Parameters
    ----------
    sets : iterable of iterables
        One collection of labels per sample; an empty collection is a sample
        with no label.
    labels : sequence, optional
        The label list, in order. Without it, every label seen, sorted.
    name : str, default "labels"
        What the sets are called in error messages (e.g. a column name).

    Returns
    -------
    indicators : numpy.ndarray of bool, shape (n, L)
    labels : list
        The label of each column.

    Raises
    ------
    InvalidInputError
        When a set holds a label that is not in ``labels``.

    Examples
    --------
    >>> ind, labels = indicators_from_sets([{"gull"}, set(), {"gull", "tern"}])
    >>> labels, ind.astype(int).tolist()
    (['gull', 'tern'], [[1, 0], [0, 0], [1, 1]])
    """
    sets = [list(s) for s in sets]
    flat = [lab for s in sets for lab in s]
    if labels is None:
        labels = sorted(set(flat), key=lambda v: (type(v).__name__, v))
    labels = list(labels)
    index = pd.Index(labels)
    if index.has_duplicates:
        raise InvalidInputError(f"the label list names {index[index.duplicated()][0]!r} twice")
    rows = np.repeat(np.arange(len(sets)), [len(s) for s in sets])
    cols = index.get_indexer(pd.Index(flat, dtype=object)) if flat else np.zeros(0, np.int64)
    bad = np.flatnonzero(cols < 0)
    if bad.size:
        shown = ", ".join(repr(v) for v in labels[:10]) + (", ..." if len(labels) > 10 else "")
        raise InvalidInputError(
            f"{name} row {int(rows[bad[0]]) + 1}: label {flat[bad[0]]!r} is not in the label "
            f"list [{shown}] ({bad.size} such labels in all)"
        )
    out = np.zeros((len(sets), len(labels)), dtype=bool)
    out[rows, cols] = True
    return out, labels


def _indicator(values, name: str) -> tuple[np.ndarray, list | None]:
    names = list(values.columns) if isinstance(values, pd.DataFrame) else None
    arr = values.to_numpy() if isinstance(values, pd.DataFrame) else np.asarray(values)
    if arr.ndim != 2:
        raise InvalidInputError(
            f"`{name}` must be a 2-D indicator matrix (samples x labels); got shape {arr.shape!r}"
        )
    if arr.dtype == bool:
        return arr, names
    if arr.dtype.kind not in "iuf":
        raise InvalidInputError(
            f"`{name}` must hold 0/1 or True/False; got values of dtype {arr.dtype!r}"
        )
    bad = ~np.isin(arr, (0, 1))
    if bad.any():
        r, c = np.argwhere(bad)[0]
        col = names[c] if names else int(c)
        raise InvalidInputError(
            f"`{name}` row {int(r) + 1} label {col!r}: indicator {arr[r, c].item()!r} is not "
            "0/1 or True/False"
        )
    return arr.astype(bool), names


def multilabel_tally(truth: ArrayLike | pd.DataFrame, pred: ArrayLike | pd.DataFrame, *,
                     labels: Sequence | None = None, folds: ArrayLike | None = None,
                     weights: ArrayLike | None = None) -> xr.DataArray:
    """Count indicator matrices into a multilabel confusion tensor.

    Parameters
    ----------
    truth, pred : array_like or pandas.DataFrame, shape (n, L)
        Boolean (or 0/1) indicators: sample ``i`` has label ``j``.
    labels : sequence, optional
        The L label names; default the DataFrame columns of ``truth``, or
        ``0 .. L-1``.
    folds : array_like, optional
        One fold label per sample; adds a leading ``fold`` dim.
    weights : array_like, optional
        Non-negative sample weights (the same for every label); float counts.

    Returns
    -------
    xarray.DataArray
        Dims ``([fold,] label, actual, predicted)``, class coordinates
        ``[False, True]``.

    Raises
    ------
    InvalidInputError
        On shapes that differ, indicators other than 0/1, a wrong number of
        label names, or bad weights or folds.

    Notes
    -----
    All labels are counted in one ``numpy.bincount`` over the cell code
    ``((fold \\cdot L + label) \\cdot 2 + actual) \\cdot 2 + predicted``, taken
    over blocks of rows so the index array stays small; there is no loop over
    labels. The layout of each label's 2 x 2 matrix, rows actual and columns
    predicted, is ``[[TN, FP], [FN, TP]]``.

    Examples
    --------
    >>> t = multilabel_tally([[1, 0], [1, 1], [0, 1]], [[1, 0], [0, 1], [1, 1]],
    ...                      labels=["gull", "tern"])
    >>> t.dims
    ('label', 'actual', 'predicted')
    >>> t.sel(label="gull").values.tolist()
    [[0, 1], [1, 1]]
    """
    yt, names_t = _indicator(truth, "truth")
    yp, _ = _indicator(pred, "pred")
    if yt.shape != yp.shape:
        raise InvalidInputError(
            f"truth and pred indicator matrices differ in shape: {yt.shape!r} and {yp.shape!r}"
        )
    n, n_labels = yt.shape
    if n_labels == 0:
        raise InvalidInputError("no labels to evaluate: the indicator matrices have no columns "
                                "(every label set is empty?)")
    if labels is None:
        labels = names_t if names_t is not None else list(range(n_labels))
    labels = list(labels)
    if len(labels) != n_labels:
        raise InvalidInputError(
            f"`labels` names {len(labels)} labels but the indicators have {n_labels} columns"
        )
    leading: dict = {}
    fold_codes, n_folds = np.zeros(n, dtype=np.int64), 1
    if folds is not None:
        folds = np.asarray(folds, dtype=object) if not isinstance(folds, np.ndarray) else folds
        if len(folds) != n:
            raise InvalidInputError(f"`folds` has {len(folds)} entries for {n} samples")
        codes, uniques = pd.factorize(pd.Series(folds), sort=True, use_na_sentinel=True)
        if (codes < 0).any():
            raise InvalidInputError(
                f"`folds` row {int(np.flatnonzero(codes < 0)[0]) + 1}: missing fold label")
        fold_codes, n_folds = codes.astype(np.int64), len(uniques)
        leading[FOLD] = [u.item() if isinstance(u, np.generic) else u for u in uniques]
    w = None
    if weights is not None:
        w = np.asarray(weights, dtype=np.float64)
        if w.shape != (n,):
            raise InvalidInputError(
                f"`weights` must have one value per sample; got shape {w.shape!r}")
        if not np.isfinite(w).all() or (w < 0).any():
            bad = int(np.flatnonzero(~np.isfinite(w) | (w < 0))[0])
            raise InvalidInputError(f"`weights` row {bad + 1}: {w[bad].item()!r} is not a "
                                    "finite non-negative weight")
    counts = _bincount(yt, yp, fold_codes, n_folds, w)
    dims = (*leading, LABEL, ACTUAL, PREDICTED)
    shape = (n_folds,) * bool(leading) + (n_labels, 2, 2)
    t = xr.DataArray(counts.reshape(shape), dims=dims,
                     coords={**leading, LABEL: labels, ACTUAL: BINARY, PREDICTED: BINARY},
                     name=COUNT)
    return validate_tensor(t)


def _bincount(yt, yp, fold_codes, n_folds, w) -> np.ndarray:
    n, n_labels = yt.shape
    total = n_folds * n_labels * 4
    counts = np.zeros(total, dtype=np.float64 if w is not None else np.int64)
    offset = (np.arange(n_labels, dtype=np.int64) * 4)[None, :]
    step = max(1, _CHUNK // max(n_labels, 1))
    for start in range(0, n, step):
        stop = min(n, start + step)
        cell = yt[start:stop].view(np.uint8) * np.uint8(2) + yp[start:stop].view(np.uint8)
        index = offset + cell
        if n_folds > 1:
            index = index + (fold_codes[start:stop] * (n_labels * 4))[:, None]
        weights = None if w is None else np.broadcast_to(w[start:stop, None], cell.shape).ravel()
        counts += np.bincount(index.ravel(), weights=weights, minlength=total).astype(
            counts.dtype, copy=False)
    return counts

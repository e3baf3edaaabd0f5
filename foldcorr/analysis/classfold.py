"""Class by fold: each class's one-vs-rest MCC, shortfall share and rank in every fold.

:func:`class_by_fold` tells a class that is a problem in every fold (a stable
problem) from one whose rank jumps from fold to fold (a noisy one): a class
*moves* when the spread of its ranks over the folds is at least
:func:`move_spread` places.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import xarray as xr

from foldcorr.decomposition import decompose
from foldcorr.errors import InvalidTensorError, UndefinedMetricWarning
from foldcorr.tensor import CLASS, FOLD, validate_tensor

__all__ = ["class_by_fold", "move_spread", "MIN_MOVE"]

#: A class moves when its rank spread over the folds reaches max(MIN_MOVE, K / 4).
MIN_MOVE = 3


def move_spread(n_classes: int) -> int:
    """The rank spread (best to worst fold) at which a class counts as moving.

    Examples
    --------
    >>> move_spread(10), move_spread(40)
    (3, 10)
    """
    return max(MIN_MOVE, math.ceil(n_classes / 4))


def _ranks(values: np.ndarray) -> np.ndarray:
    """1 for the largest value along the last axis; ties share the worst rank."""
    rows = values.reshape(-1, values.shape[-1])
    out = np.empty(rows.shape, dtype=np.int64)
    for i, row in enumerate(rows):
        out[i] = np.searchsorted(np.sort(-row), -row, side="right")
    return out.reshape(values.shape)


def class_by_fold(t: xr.DataArray, *, undefined: str = "zero") -> xr.Dataset:
    """Per-class MCC, shortfall share and rank in each fold, and how far each class's rank moves.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor with a ``fold`` dim, dense or sparse.
    undefined : {"zero", "nan"}, default "zero"
        Convention for a one-vs-rest MCC that is 0/0 in a fold (a class
        absent from that fold's truth or predictions); no warning is raised
        here, the pooled figures already name such classes.

    Returns
    -------
    xarray.Dataset
        Dims ``(fold, class)``: ``mcc``, ``shortfall_share`` (of that fold's
        1 - R_K, see :func:`foldcorr.decomposition.decompose`) and ``rank``
        (1 for the largest share in the fold; ties share the worst rank, so
        that classes without any cost in a fold sit at the bottom together;
        shares are rounded to 12 decimals first, so that rounding noise does
        not break ties). Dim
        ``class``: ``rank_best``, ``rank_worst``, and ``moves`` (rank spread
        at least :func:`move_spread` of K).

    Raises
    ------
    InvalidTensorError
        When the tensor has no ``fold`` dim.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> t = tally(list("aabbcc") * 2, list("abbbca") + list("aabcbc"), folds=[1] * 6 + [2] * 6)
    >>> cf = class_by_fold(t)
    >>> cf["rank"].values.tolist(), cf["mcc"].round(3).values.tolist()[0]
    ([[1, 2, 3], [3, 2, 2]], [0.25, 0.707, 0.632])
    """
    t = validate_tensor(t)
    if FOLD not in t.dims:
        raise InvalidTensorError(f"class by fold needs a 'fold' dim; the tensor has dims {t.dims!r}")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        parts = decompose(t, undefined=undefined)
    mcc = parts["mcc"].transpose(FOLD, CLASS)
    share = parts["shortfall_share"].transpose(FOLD, CLASS)
    rank = share.copy(data=_ranks(np.round(share.values, 12))).rename("rank")
    best, worst = rank.min(FOLD), rank.max(FOLD)
    moves = (worst - best) >= move_spread(t.sizes["actual"])
    return xr.Dataset({"mcc": mcc, "shortfall_share": share, "rank": rank,
                       "rank_best": best, "rank_worst": worst, "moves": moves})

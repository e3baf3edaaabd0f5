r"""Score sweeps: the confusion matrix at every distinct threshold, in one sort.

A threshold :math:`\theta` predicts positive every sample with score
:math:`\ge \theta`; higher scores mean positive. Sorting the scores once and
taking cumulative counts gives TP, FP, FN and TN at every distinct score value,
ties included exactly. The curve is an ordinary confusion tensor with a leading
``threshold`` dim, so MCC, accuracy, F1, recall and precision come from
:mod:`foldcorr.metrics` unchanged. The cross-fold choice picks, for each fold,
the threshold that maximises MCC on the *other* folds and scores it on the
held-out fold, which removes the optimism of the in-sample best.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr import metrics as m
from foldcorr.errors import InvalidInputError, UndefinedMetricWarning, check_choice
from foldcorr.tensor import ACTUAL, CLASS, COUNT, FOLD, PREDICTED

__all__ = ["threshold_curve", "sweep", "LabelSweep", "SweepResult", "THRESHOLD"]

#: Name of the threshold dim of a curve.
THRESHOLD = "threshold"

BINARY = [False, True]


def _check_scores(scores, name: str) -> np.ndarray:
    arr = np.asarray(scores)
    if arr.dtype == object:
        try:
            arr = arr.astype(np.float64)
        except (TypeError, ValueError):
            bad = next(i for i, v in enumerate(arr.ravel()) if not _is_number(v))
            raise InvalidInputError(
                f"{name} row {bad + 1}: score {arr.ravel()[bad]!r} is not a number") from None
    if arr.dtype.kind not in "iuf" and arr.dtype != bool:
        raise InvalidInputError(f"{name} must be numeric; got dtype {arr.dtype!r}")
    arr = arr.astype(np.float64, copy=False)
    with np.errstate(over="ignore", invalid="ignore"):
        total = np.sum(arr)
    if np.isfinite(total):  # NaN and infinities always reach the sum (one reduction)
        return arr
    bad = ~np.isfinite(arr)  # the sum can also overflow: look at each score
    if bad.any():
        i = int(np.flatnonzero(bad.ravel())[0])
        raise InvalidInputError(
            f"{name} row {i + 1}: score {arr.ravel()[i].item()!r} is not finite "
            f"({int(bad.sum())} NaN or infinite scores); scores must be finite numbers")
    return arr


def _is_number(v) -> bool:
    try:
        float(v)
    except (TypeError, ValueError):
        return False
    return True


def _check_truth(truth, name: str) -> np.ndarray:
    arr = np.asarray(truth)
    if arr.dtype == bool:
        return arr
    if arr.dtype.kind in "iuf":
        bad = ~np.isin(arr, (0, 1))
        if not bad.any():
            return arr.astype(bool)
        i = int(np.flatnonzero(bad.ravel())[0])
        raise InvalidInputError(f"{name} row {i + 1}: truth {arr.ravel()[i].item()!r} is not "
                                "0/1 or True/False")
    raise InvalidInputError(f"{name} must be 0/1 or True/False; got dtype {arr.dtype!r}")


class _Grid:
    """Distinct thresholds of one score array and the counts on them, from one sort.

    The scores are sorted once together with the truth (see :func:`_sort_with_truth`).
    ``values`` is the sorted score array, ``thresholds`` the distinct scores
    (ascending), ``first`` the position of each one's first occurrence in
    ``values``, ``predicted`` the number of samples with score >= each and
    ``tp`` the number of positives among them.
    """

    def __init__(self, scores: np.ndarray, truth: np.ndarray):
        n = scores.size
        total_pos = int(np.count_nonzero(truth))
        packed, parts = _sort_with_truth(scores, truth)
        tp_all, repeats = _positives_at_or_above(packed, total_pos)
        self.values = _unpack(packed, parts)
        v = self.values
        self.n, self.total_pos = n, total_pos
        if not repeats:  # every score distinct: no gather needed
            self._first = None
            self.thresholds, self.tp = v, tp_all
        else:
            change = np.empty(n, dtype=bool)
            change[0] = True
            np.not_equal(v[1:], v[:-1], out=change[1:])
            self._first = np.flatnonzero(change)
            self.thresholds, self.tp = v[self._first], tp_all[self._first]

    @property
    def first(self) -> np.ndarray:
        return np.arange(self.n) if self._first is None else self._first

    @property
    def predicted(self) -> np.ndarray:
        return self.n - self.first


#: Mask of the 63 magnitude bits of a float64 seen as an int64.
_MAGNITUDE = np.int64(0x7FFF_FFFF_FFFF_FFFF)
_ONE = np.uint64(1)
#: Elements per block of the blocked passes: a few blocks' scratch arrays fit in cache.
_CHUNK = 1 << 15


def _sort_with_truth(scores: np.ndarray, truth: np.ndarray):
    """Sort the scores carrying the truth along, with one value sort (no argsort).

    Each score becomes an order-preserving integer key (its IEEE 754 bits, with
    the magnitude bits of negative numbers flipped; -0.0 counts as 0.0), shifted
    left by one bit with the truth in the freed lowest bit, and the uint64 array
    is sorted in place. The key is taken relative to the smallest one, so it
    fits in 63 bits whenever the keys span less than 2**63 (always for scores of
    one sign); otherwise negative and non-negative scores are sorted as two
    parts, which are in order one after the other. Returns the sorted packed
    array and the parts ``(start, stop, offset)`` that :func:`_unpack` needs.
    """
    n = scores.size
    packed = np.empty(n, dtype=np.uint64)
    if n == 0:
        return packed, []
    bits = np.ascontiguousarray(scores, dtype=np.float64).view(np.int64)
    if int(bits.min()) >= 0:  # no sign bit anywhere: the bits are the keys, offset 0
        ubits = bits.view(np.uint64)
        for a in range(0, n, _CHUNK):  # blocked: the shifted block is still in cache for the OR
            block = packed[a:a + _CHUNK]
            np.left_shift(ubits[a:a + _CHUNK], _ONE, out=block)
            np.bitwise_or(block, truth[a:a + _CHUNK], out=block)
        packed.sort()
        return packed, [(0, n, 0)]
    bits = (scores + 0.0).view(np.int64)  # -0.0 + 0.0 is +0.0
    keys = bits ^ ((bits >> 63) & _MAGNITUDE)
    lo, hi = int(keys.min()), int(keys.max())
    if hi - lo < 2 ** 63:
        pieces = [(keys, truth, 0, n, lo)]
    else:
        neg = keys < 0
        m = int(np.count_nonzero(neg))
        pieces = [(keys[neg], truth[neg], 0, m, lo), (keys[~neg], truth[~neg], m, n, 0)]
    for k, y, a, b, offset in pieces:
        out = packed[a:b]
        np.subtract(k, offset, out=out.view(np.int64))
        out <<= _ONE
        np.bitwise_or(out, y, out=out)
        out.sort()
    return packed, [(a, b, offset) for _, _, a, b, offset in pieces]


def _unpack(packed: np.ndarray, parts) -> np.ndarray:
    """The sorted scores (float64), in place of the keys of :func:`_sort_with_truth`.

    The truth bits must already be shifted out (:func:`_positives_at_or_above` does it).
    """
    keys = packed.view(np.int64)
    if parts != [(0, packed.size, 0)]:
        for a, b, offset in parts:
            keys[a:b] += offset
        keys ^= (keys >> 63) & _MAGNITUDE
    return keys.view(np.float64)


def _positives_at_or_above(packed: np.ndarray, total_pos: int):
    """Positives at or after each position of the sorted packed array, and whether keys repeat.

    A cumulative count of the truth bits in cache-sized blocks, which also
    shifts the bits out of ``packed`` (leaving the keys) and compares
    neighbouring keys. Returns the counts and True when some key repeats.
    """
    n = packed.size
    out = np.empty(n, dtype=np.int64)
    bit = np.empty(min(n, _CHUNK), dtype=np.int64)
    csum = np.empty_like(bit)
    same = np.empty(max(min(n, _CHUNK) - 1, 0), dtype=bool)
    keys = packed.view(np.int64)
    carry = total_pos  # positives at or after the block's first position
    repeats = False
    for a in range(0, n, _CHUNK):
        b = min(a + _CHUNK, n)
        bt, cs = bit[:b - a], csum[:b - a]
        np.bitwise_and(keys[a:b], 1, out=bt)
        np.cumsum(bt, out=cs)
        block = out[a:b]
        np.subtract(bt, cs, out=block)  # minus the positives in [a, p)
        block += carry
        carry -= int(cs[-1])
        kb = packed[a:b]
        kb >>= _ONE
        if not repeats:
            np.equal(kb[1:], kb[:-1], out=same[:b - a - 1])
            repeats = bool(same[:b - a - 1].any()) or (a > 0 and packed[a - 1] == kb[0])
    return out, repeats


#: Sorted keys located per block; each block searches only its slice of the array.
_BLOCK = 1024


def _locate(values: np.ndarray, keys: np.ndarray) -> np.ndarray:
    """``np.searchsorted(values, keys, "left")`` for sorted ``keys``, in cache-sized blocks.

    Each block of keys is searched in the slice of ``values`` between its first
    and last key only, which keeps the binary searches in cache (about twice
    as fast as one call on 10^7 values); the result is identical.
    """
    m = keys.size
    if m <= 4 * _BLOCK:
        return np.searchsorted(values, keys, side="left")
    out = np.empty(m, dtype=np.intp)
    starts = np.searchsorted(values, keys[::_BLOCK], side="left")
    stops = np.searchsorted(values, keys[_BLOCK - 1::_BLOCK], side="right")
    stops = np.append(stops, values.size)
    for c, a in enumerate(range(0, m, _BLOCK)):
        lo, hi = starts[c], stops[c]
        out[a:a + _BLOCK] = np.searchsorted(values[lo:hi], keys[a:a + _BLOCK], side="left")
        out[a:a + _BLOCK] += lo
    return out


def _curve_counts(truth: np.ndarray, scores: np.ndarray):
    """Thresholds ascending and (tp, fp, positives, n) at each, with the grid."""
    grid = _Grid(scores, truth)
    return grid, grid.tp, grid.predicted - grid.tp, grid.total_pos, grid.n


def _fp_and_mcc(grid: _Grid, undefined: str):
    r"""FP and MCC at every threshold of ``grid``, in cache-sized blocks.

    The same arithmetic as :func:`_mcc_counts` (so the same floats), done a
    block at a time so that its dozen steps run on scratch arrays in cache
    instead of as passes over the whole curve. The denominator is zero only at
    the lowest threshold (every sample predicted positive) or everywhere when
    there are no positives or no negatives.
    """
    m, n, total_pos = grid.thresholds.size, grid.n, grid.total_pos
    tp, first = grid.tp, grid._first
    fp = np.empty(m, dtype=np.int64)
    mcc = np.empty(m, dtype=np.float64)
    size = min(m, _CHUNK)
    step = np.arange(size, dtype=np.int64)
    fstep = np.arange(size, dtype=np.float64)
    f, pp, num, tmp = (np.empty(size) for _ in range(4))
    scale = math.sqrt(float(total_pos) * float(n - total_pos))
    with np.errstate(invalid="ignore", divide="ignore"):
        for a in range(0, m, _CHUNK):
            b = min(a + _CHUNK, m)
            k = b - a
            fb, pb, tb, ub, fpb, tpb = f[:k], pp[:k], num[:k], tmp[:k], fp[a:b], tp[a:b]
            if first is None:  # the j-th threshold is the j-th sorted score
                np.subtract(n - a, step[:k], out=fpb)
                np.add(fstep[:k], a, out=fb)
            else:
                np.subtract(n, first[a:b], out=fpb)
                np.copyto(fb, first[a:b])
            fpb -= tpb  # predicted positive minus TP
            np.subtract(float(n), fb, out=pb)  # predicted positive, PP
            np.copyto(tb, tpb)
            tb *= float(n)
            np.multiply(pb, float(total_pos), out=ub)
            tb -= ub  # n TP - n+ PP = TP TN - FP FN, exact in float64
            fb *= pb  # (n - PP) PP
            np.sqrt(fb, out=fb)
            fb *= scale
            np.divide(tb, fb, out=mcc[a:b])
            np.clip(mcc[a:b], -1.0, 1.0, out=mcc[a:b])
    if m:
        fill = 0.0 if undefined == "zero" else np.nan
        if scale == 0:
            mcc[:] = fill
        else:
            mcc[0] = fill
    return fp, mcc


def _mcc_counts(tp, fp, total_pos, n, undefined: str) -> np.ndarray:
    r"""Binary MCC from the counts at each threshold (Matthews 1975), vectorised.

    The same value as :func:`foldcorr.metrics.mcc` on each threshold's 2 x 2
    tensor (checked in the tests), computed straight from the four counts so a
    curve of 10^7 thresholds costs a few array passes.
    """
    # tp*tn - fp*fn = n*tp - pp*n+ with pp = tp + fp predicted positive and n+ = total_pos,
    # in float64 (exact for counts below 2**53 / n). Where the denominator is 0 the numerator
    # is exactly 0 too (pp = 0: tp = 0; pp = n: tp = n+; n+ = 0 or n: tp = 0 or pp), so the
    # zero convention needs no mask.
    tp = np.atleast_1d(np.asarray(tp, dtype=np.float64))
    pp = np.array(fp, dtype=np.float64, ndmin=1)  # a copy: the caller's array is kept
    pp += tp
    out = tp * float(n)
    out -= pp * float(total_pos)
    den = float(n) - pp
    den *= pp
    np.sqrt(den, out=den)
    den *= math.sqrt(float(total_pos) * float(n - total_pos))
    defined = den != 0
    np.divide(out, den, out=out, where=defined)
    if undefined == "nan":
        out[~defined] = np.nan
    return np.clip(out, -1.0, 1.0, out=out)


def _curve_tensor(thresholds, tp, fp, total_pos, n) -> xr.DataArray:
    fn = total_pos - tp
    tn = (n - total_pos) - fp
    cells = np.stack([np.stack([tn, fp], -1), np.stack([fn, tp], -1)], -2)
    return xr.DataArray(cells, dims=(THRESHOLD, ACTUAL, PREDICTED),
                        coords={THRESHOLD: thresholds, ACTUAL: BINARY, PREDICTED: BINARY},
                        name=COUNT)


def threshold_curve(truth, scores, *, undefined: str = "zero") -> xr.Dataset:
    r"""Confusion counts and figures at every distinct score threshold.

    Parameters
    ----------
    truth : array_like of bool or 0/1, shape (n,)
        Actual positives.
    scores : array_like of float, shape (n,)
        Scores; higher means positive.
    undefined : {"zero", "nan"}, default "zero"
        Value of figures that are 0/0 at a threshold (for example MCC at the
        lowest threshold, where every sample is predicted positive).

    Returns
    -------
    xarray.Dataset
        Dim ``threshold`` (the distinct scores, ascending): ``count`` (the
        confusion tensor, dims ``(threshold, actual, predicted)``), ``tp``,
        ``fp``, ``fn``, ``tn``, ``mcc``, ``accuracy``, ``f1``, ``recall`` and
        ``precision`` (of the positive class).

    Raises
    ------
    InvalidInputError
        On truth other than 0/1, scores that are not finite numbers, or
        arrays of different length.

    Notes
    -----
    Threshold :math:`\theta` predicts positive every sample with
    :math:`\text{score} \ge \theta`. The scores are sorted once, with the
    truth carried along in the lowest bit of an order-preserving 64-bit
    integer key (a value sort, no argsort); the position :math:`f_j` of the
    first occurrence of the :math:`j`-th distinct score gives the number
    predicted positive, :math:`n - f_j`, and a suffix sum of the truth bits
    gives :math:`TP_j`; then :math:`FP_j = n - f_j - TP_j`,
    :math:`FN_j = n^+ - TP_j`, :math:`TN_j = n^- - FP_j`. Ties are exact:
    every sample whose score equals a threshold is on the positive side of
    it. Cost :math:`O(n \log n)`.
    The figures at each threshold are :func:`foldcorr.metrics.mcc` and its
    companions on that 2 x 2 matrix; undefined values at single thresholds
    are not warned about (at the lowest threshold every sample is predicted
    positive, so MCC is always 0/0 there).

    Examples
    --------
    >>> c = threshold_curve([0, 0, 1, 1], [0.1, 0.4, 0.4, 0.8])
    >>> c["threshold"].values.tolist(), c["tp"].values.tolist(), c["fp"].values.tolist()
    ([0.1, 0.4, 0.8], [2, 2, 1], [2, 1, 0])
    >>> c["mcc"].round(4).values.tolist()
    [0.0, 0.5774, 0.5774]
    """
    check_choice("undefined", undefined, m.UNDEFINED_CHOICES)
    y = _check_truth(truth, "truth")
    s = _check_scores(scores, "scores")
    if y.ndim != 1 or s.shape != y.shape:
        raise InvalidInputError(
            f"truth and scores must be 1-D of the same length; got shapes {y.shape!r} and "
            f"{s.shape!r}")
    grid, tp, fp, total_pos, n = _curve_counts(y, s)
    return _figures(_curve_tensor(grid.thresholds, tp, fp, total_pos, n), undefined)


def _figures(t: xr.DataArray, undefined: str) -> xr.Dataset:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        pos = {CLASS: True}
        out = xr.Dataset({
            COUNT: t,
            "tp": t.sel({ACTUAL: True, PREDICTED: True}, drop=True),
            "fp": t.sel({ACTUAL: False, PREDICTED: True}, drop=True),
            "fn": t.sel({ACTUAL: True, PREDICTED: False}, drop=True),
            "tn": t.sel({ACTUAL: False, PREDICTED: False}, drop=True),
            "mcc": m.mcc(t, undefined=undefined),
            "accuracy": m.accuracy(t, undefined=undefined),
            "f1": m.f1(t, undefined=undefined).sel(pos, drop=True),
            "recall": m.recall(t, undefined=undefined).sel(pos, drop=True),
            "precision": m.precision(t, undefined=undefined).sel(pos, drop=True),
        })
    return out


def _argbest(mcc: np.ndarray, allowed: np.ndarray | None = None) -> int:
    """Index of the largest MCC (ties go to the highest threshold); -1 if none."""
    if mcc.size == 0:
        return -1
    score = mcc if allowed is None else np.where(allowed, mcc, -np.inf)
    i = int(np.argmax(score))
    if np.isnan(score[i]):  # argmax stops at the first NaN: set the NaNs aside
        score = np.where(np.isnan(score), -np.inf, score)
        i = int(np.argmax(score))
    top = score[i]
    if top == -np.inf:
        return -1
    later = np.flatnonzero(score[i + 1:] == top)  # argmax gives the first of ties
    return i + 1 + int(later[-1]) if later.size else i


def _mcc_at(grid: _Grid, tp, fp, total_pos, n, at: float, undefined: str) -> float:
    """MCC of predicting ``score >= at``, read off the curve counts."""
    i = int(np.searchsorted(grid.thresholds, at, side="left"))
    tp_i, fp_i = (tp[i], fp[i]) if i < len(grid.thresholds) else (0, 0)
    return float(_mcc_counts(tp_i, fp_i, total_pos, n, undefined)[0])


@dataclass(frozen=True)
class LabelSweep:
    """The sweep of one label (or of a binary problem).

    Attributes
    ----------
    label : object
        Label name (None for a binary sweep).
    curve : xarray.Dataset
        Dim ``threshold`` (distinct scores, ascending): ``tp``, ``fp``, ``fn``,
        ``tn`` and ``mcc``. :meth:`figures` adds the companions. Built from the
        counts kept by the sweep on first access (a cached property).
    n_thresholds : int
        Number of distinct thresholds.
    best_threshold, best_mcc : float
        The in-sample MCC-maximising threshold (ties to the highest) and its
        MCC: optimistic, since it is chosen and scored on the same samples.
    at_threshold, mcc_at : float or None
        The user's threshold and the MCC there; None when not asked for.
    crossfold : xarray.Dataset or None
        Dim ``fold``: ``threshold`` (chosen on the other folds), ``mcc`` (of
        that threshold on the held-out fold) and ``n``; None without folds.
    crossfold_mcc : float or None
        Mean held-out MCC over folds.
    undefined : str
        The convention used for undefined values.
    """

    label: object
    n_thresholds: int
    best_threshold: float
    best_mcc: float
    at_threshold: float | None
    mcc_at: float | None
    crossfold: xr.Dataset | None
    crossfold_mcc: float | None
    undefined: str = "zero"
    #: (thresholds, tp, fp, mcc, positives, n): what :attr:`curve` is built from.
    _counts: tuple = field(default=(np.empty(0), np.empty(0, np.int64), np.empty(0, np.int64),
                                    np.empty(0), 0, 0), repr=False, compare=False)

    @cached_property
    def curve(self) -> xr.Dataset:
        """Counts and MCC at every distinct threshold (see the class Attributes)."""
        thresholds, tp, fp, mcc, total_pos, n = self._counts
        return xr.Dataset({"tp": (THRESHOLD, tp), "fp": (THRESHOLD, fp),
                           "fn": (THRESHOLD, total_pos - tp),
                           "tn": (THRESHOLD, (n - total_pos) - fp),
                           "mcc": (THRESHOLD, mcc)}, coords={THRESHOLD: thresholds})

    def figures(self, *, max_points: int | None = None) -> xr.Dataset:
        """The curve with accuracy, F1, recall and precision, from :mod:`foldcorr.metrics`.

        Parameters
        ----------
        max_points : int, optional
            Keep at most about this many thresholds, evenly spaced in curve
            order plus the best threshold (for drawing); all when None.

        Examples
        --------
        >>> s = sweep([0, 1, 1], [0.2, 0.5, 0.9]).labels[0]
        >>> s.figures()["recall"].values.tolist()
        [1.0, 1.0, 0.5]
        """
        c = self.curve
        size = c.sizes[THRESHOLD]
        if max_points is not None and size > max_points:
            keep = np.unique(np.concatenate([
                np.linspace(0, size - 1, max_points).round().astype(np.int64),
                np.flatnonzero(c[THRESHOLD].values == self.best_threshold)]))
            c = c.isel({THRESHOLD: keep})
        total_pos = int(c["tp"].values[0] + c["fn"].values[0]) if size else 0
        n = int(c["tp"].values[0] + c["fp"].values[0] + c["fn"].values[0] + c["tn"].values[0]) \
            if size else 0
        t = _curve_tensor(c[THRESHOLD].values, c["tp"].values, c["fp"].values, total_pos, n)
        return _figures(t, self.undefined)

    @property
    def optimism(self) -> float | None:
        """In-sample best MCC minus mean held-out MCC (None without folds)."""
        if self.crossfold_mcc is None:
            return None
        return self.best_mcc - self.crossfold_mcc


@dataclass(frozen=True)
class SweepResult:
    """Sweeps of every label.

    Attributes
    ----------
    labels : tuple of LabelSweep
        One entry per label, in input order (one entry for a binary sweep).
    n : int
        Number of samples.
    folds : list or None
        Fold labels, in order, or None without folds.
    warnings : tuple of str
        Labels whose MCC is undefined at every threshold, and similar notes.
    undefined : str
        The convention used for undefined values.
    """

    labels: tuple[LabelSweep, ...]
    n: int
    folds: list | None
    warnings: tuple[str, ...]
    undefined: str = "zero"

    def __rich__(self):
        from foldcorr.report.sweep import sweep_report  # rendering is the report layer
        from foldcorr.report.text import render_rich

        return render_rich(sweep_report(self))


def sweep(truth, scores, *, labels: Sequence | None = None, folds=None,
          at: float | None = None, undefined: str = "zero") -> SweepResult:
    r"""Sweep the threshold of a score for one or many labels, with a cross-fold choice.

    Parameters
    ----------
    truth : array_like of bool or 0/1, shape (n,) or (n, L)
        Actual positives, one column per label.
    scores : array_like of float, same shape as ``truth``
        Scores; higher means positive.
    labels : sequence, optional
        The L label names (default ``0 .. L-1``; None for 1-D input).
    folds : array_like, shape (n,), optional
        Fold of each sample. With two or more folds, each fold's threshold is
        chosen on the other folds and scored on it.
    at : float, optional
        A threshold of the user's, scored on all samples.
    undefined : {"zero", "nan"}, default "zero"
        Value of 0/0 figures.

    Returns
    -------
    SweepResult

    Raises
    ------
    InvalidInputError
        On truth other than 0/1, non-finite or non-numeric scores, shapes that
        differ, or fewer than two folds when folds are given.

    Warns
    -----
    The result's ``warnings`` name labels whose MCC is undefined at every
    threshold (no positives, no negatives, or a constant score).

    Notes
    -----
    Each label's scores are sorted once (see :func:`threshold_curve`). Each
    fold's counts are then located on that label's grid of distinct scores (a
    sort of the fold's scores with their truth, which together are one more
    sort of the array), and the other folds' counts are the totals minus the
    fold's. Only
    thresholds that occur among the other folds' scores are candidates. MCC at
    every threshold is computed straight from the four counts (Matthews 1975),
    the same value as :func:`foldcorr.metrics.mcc` on each 2 x 2 matrix, in
    cache-sized blocks, so a curve of 10^7 thresholds costs about one pass over
    memory; FN, TN (:attr:`LabelSweep.curve`) and the companions
    (:meth:`LabelSweep.figures`) are computed when first asked for. For fold
    :math:`j`,

    .. math:: \hat\theta_{-j} = \arg\max_\theta \mathrm{MCC}_{-j}(\theta), \qquad
              \text{crossfold MCC} = \frac{1}{J}\sum_j \mathrm{MCC}_j(\hat\theta_{-j})

    References
    ----------
    .. [1] B. W. Matthews, "Comparison of the predicted and observed secondary
       structure of T4 phage lysozyme", BBA 405 (1975) 442-451.
    .. [2] G. C. Cawley, N. L. C. Talbot, "On over-fitting in model selection
       and subsequent selection bias in performance evaluation", JMLR 11
       (2010) 2079-2107.

    Examples
    --------
    >>> r = sweep([0, 0, 1, 1, 0, 1], [0.2, 0.6, 0.7, 0.9, 0.1, 0.4],
    ...           folds=[1, 1, 1, 2, 2, 2], at=0.5)
    >>> s = r.labels[0]
    >>> s.best_threshold, round(s.best_mcc, 4), round(s.mcc_at, 4)
    (0.7, 0.7071, 0.3333)
    >>> s.crossfold["threshold"].values.tolist()
    [0.4, 0.7]
    """
    check_choice("undefined", undefined, m.UNDEFINED_CHOICES)
    y = _check_truth(truth, "truth")
    s = _check_scores(scores, "scores")
    if y.shape != s.shape or y.ndim not in (1, 2):
        raise InvalidInputError(
            f"truth and scores must have the same 1-D or 2-D shape; got {y.shape!r} and "
            f"{s.shape!r}")
    binary = y.ndim == 1
    if binary:
        y, s = y[:, None], s[:, None]
        names = [None] if labels is None else list(labels)
    else:
        names = list(range(y.shape[1])) if labels is None else list(labels)
    if len(names) != y.shape[1]:
        raise InvalidInputError(f"`labels` names {len(names)} labels for {y.shape[1]} columns")
    if at is not None:
        at = float(_check_scores([at], "`at`")[0])
    n = y.shape[0]
    codes, fold_labels = _fold_codes(folds, n)
    notes: list[str] = []
    out = []
    for j, name in enumerate(names):
        out.append(_sweep_one(y[:, j], s[:, j], name, codes, fold_labels, at, undefined, notes))
    return SweepResult(labels=tuple(out), n=n, folds=fold_labels, warnings=tuple(notes),
                       undefined=undefined)


def _fold_codes(folds, n):
    if folds is None:
        return None, None
    folds = pd.Series(np.asarray(folds, dtype=object) if not isinstance(folds, np.ndarray)
                      else folds)
    if len(folds) != n:
        raise InvalidInputError(f"`folds` has {len(folds)} entries for {n} samples")
    codes, uniques = pd.factorize(folds, sort=True, use_na_sentinel=True)
    if (codes < 0).any():
        raise InvalidInputError(
            f"`folds` row {int(np.flatnonzero(codes < 0)[0]) + 1}: missing fold label")
    if len(uniques) < 2:
        raise InvalidInputError(
            f"a cross-fold threshold needs at least two folds; got {len(uniques)} "
            f"({[u for u in uniques]!r})")
    return codes, [u.item() if isinstance(u, np.generic) else u for u in uniques]


def _sweep_one(y, s, name, codes, fold_labels, at, undefined, notes) -> LabelSweep:
    grid = _Grid(s, y)
    tp, total_pos, n = grid.tp, grid.total_pos, grid.n
    fp, mcc = _fp_and_mcc(grid, undefined)
    reason = _degenerate(grid, total_pos, n)
    if reason:
        where = "" if name is None else f"label {name!r}: "
        notes.append(f"{where}MCC is undefined at every threshold ({reason}); "
                     f"reported as {'0.0' if undefined == 'zero' else 'NaN'}")
    i = _argbest(mcc)
    best_t, best_mcc = (float(grid.thresholds[i]), float(mcc[i])) if i >= 0 else (np.nan, np.nan)
    mcc_at = None if at is None else _mcc_at(grid, tp, fp, total_pos, n, at, undefined)
    crossfold = crossfold_mcc = None
    if codes is not None:
        crossfold = _crossfold(grid, tp, s, y, total_pos, codes, fold_labels, undefined)
        crossfold_mcc = float(crossfold["mcc"].mean())
    return LabelSweep(label=name, n_thresholds=int(grid.thresholds.size),
                      best_threshold=best_t, best_mcc=best_mcc, at_threshold=at, mcc_at=mcc_at,
                      crossfold=crossfold, crossfold_mcc=crossfold_mcc, undefined=undefined,
                      _counts=(grid.thresholds, tp, fp, mcc, total_pos, n))


def _crossfold(grid: _Grid, tp, s, y, total_pos, codes, fold_labels, undefined) -> xr.Dataset:
    """Per fold: the best threshold on the other folds, and its MCC on the fold.

    Each fold's scores are sorted with their truth (the folds together are one
    more sort of the array, never a sort per fold of everything) and located on
    the grid of all distinct scores, so the complement's counts are the totals
    minus the fold's. Only thresholds that occur among the other folds' scores
    are candidates, exactly as if the other folds had been swept alone.
    """
    occurs = None if grid._first is None else np.diff(np.append(grid._first, grid.n))
    chosen, held, sizes = [], [], []
    for j in range(len(fold_labels)):
        inside = codes == j
        packed, parts = _sort_with_truth(s[inside], y[inside])
        positive = (packed & _ONE).astype(bool)
        packed >>= _ONE
        values = _unpack(packed, parts)  # the fold's scores, ascending
        n_j, pos_j = values.size, int(np.count_nonzero(positive))
        where = _locate(grid.values, values)  # first position of each score in the whole array
        here = np.bincount(where, minlength=grid.n)  # fold samples at each threshold
        here_pos = np.bincount(where[positive], minlength=grid.n)
        if grid._first is not None:
            here, here_pos = here[grid._first], here_pos[grid._first]
        mcc_c = _complement_mcc(grid, here, here_pos, occurs, total_pos - pos_j,
                                grid.n - n_j, undefined)
        i = _argbest(mcc_c)
        if i < 0:
            chosen.append(np.nan)
            held.append(np.nan if undefined == "nan" else 0.0)
        else:
            theta = grid.thresholds[i]
            pred_i = n_j - int(np.searchsorted(values, theta, side="left"))
            tp_i = pos_j - int(np.count_nonzero(positive[:n_j - pred_i]))
            chosen.append(float(theta))
            held.append(float(_mcc_counts(tp_i, pred_i - tp_i, pos_j, n_j, undefined)[0]))
        sizes.append(n_j)
    return xr.Dataset({"threshold": (FOLD, np.array(chosen)), "mcc": (FOLD, np.array(held)),
                       "n": (FOLD, np.array(sizes))}, coords={FOLD: fold_labels})


def _complement_mcc(grid: _Grid, here, here_pos, occurs, total_pos: int, n: int,
                    undefined: str) -> np.ndarray:
    """MCC of the other folds at every threshold, -inf where no other-fold score equals it.

    ``here`` and ``here_pos`` count the held-out fold's samples and positives at
    each threshold; the other folds' counts at or above a threshold are the
    totals minus the fold's suffix sums. Blocked like :func:`_fp_and_mcc`, with
    the arithmetic of :func:`_mcc_counts` (the same floats).
    """
    m = grid.thresholds.size
    out = np.empty(m, dtype=np.float64)
    size = min(m, _CHUNK)
    step = np.arange(size, dtype=np.int64)
    pred_b, tp_b, pp_i = (np.empty(size, dtype=np.int64) for _ in range(3))
    pp, num, den = (np.empty(size) for _ in range(3))
    allowed = np.empty(size, dtype=bool)
    scale = math.sqrt(float(total_pos) * float(n - total_pos))
    fill = 0.0 if undefined == "zero" else np.nan
    first = grid._first
    above, above_pos = 0, 0  # held-out samples / positives in the blocks after this one
    with np.errstate(invalid="ignore", divide="ignore"):
        for b in range(m, 0, -_CHUNK):  # from the top, so the suffix sums carry down
            a = max(b - _CHUNK, 0)
            k = b - a
            hb, hpb, pb, tb, ib = here[a:b], here_pos[a:b], pred_b[:k], tp_b[:k], pp_i[:k]
            np.cumsum(hb[::-1], out=pb[::-1])  # held-out samples at or above, within the block
            pb += above
            np.cumsum(hpb[::-1], out=tb[::-1])
            tb += above_pos
            above, above_pos = int(pb[0]), int(tb[0])
            if first is None:
                np.subtract(grid.n - a, step[:k], out=ib)  # all samples at or above
            else:
                np.subtract(grid.n, first[a:b], out=ib)
            ib -= pb  # the other folds' predicted positive
            np.subtract(grid.tp[a:b], tb, out=tb)  # the other folds' TP
            al = allowed[:k]
            if occurs is None:
                np.equal(hb, 0, out=al)
            else:
                np.greater(occurs[a:b], hb, out=al)
            nb, pf, db = num[:k], pp[:k], den[:k]
            np.copyto(nb, tb)
            nb *= float(n)
            np.copyto(pf, ib)
            np.multiply(pf, float(total_pos), out=db)
            nb -= db  # n TP - n+ PP
            np.subtract(float(n), pf, out=db)
            db *= pf
            np.sqrt(db, out=db)
            db *= scale
            ob = out[a:b]
            np.divide(nb, db, out=ob)
            if fill == 0.0:  # 0/0 (the numerator is 0 wherever the denominator is)
                np.copyto(ob, 0.0, where=db == 0)
            np.clip(ob, -1.0, 1.0, out=ob)
            np.copyto(ob, -np.inf, where=~al)
    return out


def _degenerate(grid: _Grid, total_pos: int, n: int) -> str:
    if total_pos == 0:
        return "no positives"
    if total_pos == n:
        return "no negatives"
    if grid.thresholds.size == 1:
        return "the score is constant"
    return ""

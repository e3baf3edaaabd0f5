r"""The counting core of score sweeps: one packed sort, then cumulative counts.

Each score is packed with its truth bit into one order-preserving 64-bit key
and the keys are sorted once (a value sort, no argsort); a blocked suffix sum of
the truth bits then gives TP at every distinct score, and FP, FN and TN follow.
MCC at every threshold, and the other folds' MCC for a cross-fold choice, are
computed from those counts in cache-sized blocks. :mod:`foldcorr.analysis.thresholds`
builds the curves, sweeps and results on top. Nothing here reads files or prints.
"""

from __future__ import annotations

import math

import numpy as np
import xarray as xr

from foldcorr.errors import InvalidInputError
from foldcorr.tensor import FOLD

__all__ = [
    "check_scores", "check_truth", "ScoreGrid", "curve_counts", "fp_and_mcc", "mcc_counts",
    "best_index", "crossfold_thresholds",
]


def check_scores(scores, name: str) -> np.ndarray:
    """Scores as a float64 array, refused unless every one is a finite number.

    Examples
    --------
    >>> check_scores([0.5, 1], "scores").tolist()
    [0.5, 1.0]
    >>> check_scores([0.5, float("nan")], "scores")
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidInputError: scores row 2: score nan is not finite ...
    """
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


def check_truth(truth, name: str) -> np.ndarray:
    """Truth as a boolean array, refused unless every value is 0/1 or True/False.

    Examples
    --------
    >>> check_truth([0, 1, 1], "truth").tolist()
    [False, True, True]
    """
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


class ScoreGrid:
    """Distinct thresholds of one score array and the counts on them, from one sort.

    The scores are sorted once together with the truth (see :func:`_sort_with_truth`).
    ``values`` is the sorted score array, ``thresholds`` the distinct scores
    (ascending), ``first`` the position of each one's first occurrence in
    ``values``, ``predicted`` the number of samples with score >= each and
    ``tp`` the number of positives among them.

    Examples
    --------
    >>> import numpy as np
    >>> g = ScoreGrid(np.array([0.4, 0.1, 0.4]), np.array([True, False, False]))
    >>> g.thresholds.tolist(), g.tp.tolist(), g.predicted.tolist()
    ([0.1, 0.4], [1, 1], [3, 2])
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


def curve_counts(truth: np.ndarray, scores: np.ndarray):
    """The grid of distinct thresholds and (tp, fp, positives, n) at each.

    Examples
    --------
    >>> import numpy as np
    >>> truth, scores = np.array([False, True, True]), np.array([0.2, 0.9, 0.2])
    >>> grid, tp, fp, pos, n = curve_counts(truth, scores)
    >>> grid.thresholds.tolist(), tp.tolist(), fp.tolist(), pos, n
    ([0.2, 0.9], [2, 1], [1, 0], 2, 3)
    """
    grid = ScoreGrid(scores, truth)
    return grid, grid.tp, grid.predicted - grid.tp, grid.total_pos, grid.n


def fp_and_mcc(grid: ScoreGrid, undefined: str):
    r"""FP and MCC at every threshold of ``grid``, in cache-sized blocks.

    The same arithmetic as :func:`mcc_counts` (so the same floats), done a
    block at a time so that its dozen steps run on scratch arrays in cache
    instead of as passes over the whole curve. The denominator is zero only at
    the lowest threshold (every sample predicted positive) or everywhere when
    there are no positives or no negatives.

    Examples
    --------
    >>> import numpy as np
    >>> grid = ScoreGrid(np.array([0.1, 0.4, 0.4, 0.8]), np.array([False, False, True, True]))
    >>> fp, mcc = fp_and_mcc(grid, "zero")
    >>> fp.tolist(), mcc.round(4).tolist()
    ([2, 1, 0], [0.0, 0.5774, 0.5774])
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


def mcc_counts(tp, fp, total_pos, n, undefined: str) -> np.ndarray:
    r"""Binary MCC from the counts at each threshold (Matthews 1975), vectorised.

    The same value as :func:`foldcorr.metrics.mcc` on each threshold's 2 x 2
    tensor (checked in the tests), computed straight from the four counts so a
    curve of 10^7 thresholds costs a few array passes.

    Examples
    --------
    >>> mcc_counts([1, 2], [0, 1], 2, 4, "zero").round(4).tolist()
    [0.5774, 0.5774]
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


def best_index(mcc: np.ndarray, allowed: np.ndarray | None = None) -> int:
    """Index of the largest MCC (ties go to the highest threshold); -1 if none.

    ``allowed`` masks the candidates; NaN never wins.

    Examples
    --------
    >>> import numpy as np
    >>> best_index(np.array([0.2, 0.7, np.nan, 0.7])), best_index(np.array([]))
    (3, -1)
    """
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


def crossfold_thresholds(grid: ScoreGrid, tp, s, y, total_pos, codes, fold_labels,
                         undefined, points: np.ndarray | None = None) -> xr.Dataset:
    """Per fold: the best threshold on the other folds, and its MCC on the fold.

    Each fold's scores are sorted with their truth (the folds together are one
    more sort of the array, never a sort per fold of everything) and located on
    the grid of all distinct scores, so the complement's counts are the totals
    minus the fold's. Only thresholds that occur among the other folds' scores
    are candidates, exactly as if the other folds had been swept alone.
    ``codes`` holds each sample's fold code, ``fold_labels`` the fold names.
    With ``points`` (indices into ``grid.thresholds``), the result also holds
    ``fold_mcc`` (dims ``fold, point``): each fold's own MCC at those
    thresholds (coordinate ``point_threshold``), from the same counts.

    Examples
    --------
    >>> import numpy as np
    >>> y = np.array([0, 1, 0, 1, 0, 1, 0, 1], dtype=bool)
    >>> s = np.array([0.1, 0.9, 0.2, 0.8, 0.3, 0.7, 0.6, 0.4])
    >>> grid = ScoreGrid(s, y)
    >>> codes = np.array([0, 0, 0, 0, 1, 1, 1, 1])
    >>> out = crossfold_thresholds(grid, grid.tp, s, y, 4, codes, ["a", "b"], "zero")
    >>> out["threshold"].values.tolist(), out["n"].values.tolist()
    ([0.7, 0.8], [4, 4])
    """
    occurs = None if grid._first is None else np.diff(np.append(grid._first, grid.n))
    chosen, held, sizes, curves = [], [], [], []
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
        if points is not None:
            curves.append(_own_mcc(here, here_pos, pos_j, n_j, points, undefined))
        mcc_c = _complement_mcc(grid, here, here_pos, occurs, total_pos - pos_j,
                                grid.n - n_j, undefined)
        i = best_index(mcc_c)
        if i < 0:
            chosen.append(np.nan)
            held.append(np.nan if undefined == "nan" else 0.0)
        else:
            theta = grid.thresholds[i]
            pred_i = n_j - int(np.searchsorted(values, theta, side="left"))
            tp_i = pos_j - int(np.count_nonzero(positive[:n_j - pred_i]))
            chosen.append(float(theta))
            held.append(float(mcc_counts(tp_i, pred_i - tp_i, pos_j, n_j, undefined)[0]))
        sizes.append(n_j)
    out = xr.Dataset({"threshold": (FOLD, np.array(chosen)), "mcc": (FOLD, np.array(held)),
                      "n": (FOLD, np.array(sizes))}, coords={FOLD: fold_labels})
    if points is not None:
        out["fold_mcc"] = xr.DataArray(np.array(curves).reshape(len(fold_labels), len(points)),
                                       dims=(FOLD, "point"),
                                       coords={"point_threshold": ("point",
                                                                   grid.thresholds[points])})
    return out


def _own_mcc(here, here_pos, pos_j: int, n_j: int, points, undefined: str) -> np.ndarray:
    """One fold's MCC at the thresholds ``points`` (ascending), from its counts at every threshold.

    The fold's samples at or above each point are the suffix sums of the counts
    between consecutive points (one pass, no array as long as the grid).
    """
    if len(points) == 0:
        return np.empty(0)
    predicted = np.add.reduceat(here, points)[::-1].cumsum()[::-1]
    positive = np.add.reduceat(here_pos, points)[::-1].cumsum()[::-1]
    return mcc_counts(positive, predicted - positive, pos_j, n_j, undefined)


def _complement_mcc(grid: ScoreGrid, here, here_pos, occurs, total_pos: int, n: int,
                    undefined: str) -> np.ndarray:
    """MCC of the other folds at every threshold, -inf where no other-fold score equals it.

    ``here`` and ``here_pos`` count the held-out fold's samples and positives at
    each threshold; the other folds' counts at or above a threshold are the
    totals minus the fold's suffix sums. Blocked like :func:`fp_and_mcc`, with
    the arithmetic of :func:`mcc_counts` (the same floats).
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

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

import warnings
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr import metrics as m
from foldcorr.errors import InvalidInputError, UndefinedMetricWarning, check_choice
from foldcorr.tally import ACTUAL, CLASS, COUNT, FOLD, PREDICTED

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
    bad = ~np.isfinite(arr)
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


def _curve_counts(truth_sorted: np.ndarray, score_sorted: np.ndarray):
    """Counts at every distinct threshold, from arrays sorted by descending score.

    Returns thresholds ascending and the matching (tp, fp, positives, n).
    """
    n = truth_sorted.size
    pos = np.cumsum(truth_sorted, dtype=np.int64)
    if n:
        last = np.flatnonzero(score_sorted[1:] != score_sorted[:-1])
        last = np.append(last, n - 1)
    else:
        last = np.zeros(0, dtype=np.int64)
    tp = pos[last]
    fp = (last + 1) - tp
    total_pos = int(pos[-1]) if n else 0
    return score_sorted[last][::-1], tp[::-1], fp[::-1], total_pos, n


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
    :math:`\text{score} \ge \theta`. With scores sorted once in descending
    order and :math:`P(i)` the cumulative count of positives among the first
    :math:`i` samples, the threshold equal to the :math:`j`-th distinct score,
    whose last occurrence is at sorted position :math:`i_j`, has
    :math:`TP = P(i_j)`, :math:`FP = i_j - TP`, :math:`FN = n^+ - TP`,
    :math:`TN = n^- - FP`. Cost :math:`O(n \log n)` for the sort and
    :math:`O(n)` after it. The figures at each threshold are
    :func:`foldcorr.metrics.mcc` and companions on that 2 x 2 matrix;
    undefined values at individual thresholds are not warned about (the
    lowest threshold is always undefined for MCC).

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
    order = np.argsort(s)[::-1]
    return _figures(_curve_tensor(*_curve_counts(y[order], s[order])), undefined)


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


def _best(curve: xr.Dataset) -> tuple[float, float]:
    """The MCC-maximising threshold (ties go to the highest threshold) and its MCC."""
    mcc = np.nan_to_num(curve["mcc"].values, nan=-np.inf)
    if mcc.size == 0:
        return float("nan"), float("nan")
    i = mcc.size - 1 - int(np.argmax(mcc[::-1]))
    return float(curve[THRESHOLD].values[i]), float(curve["mcc"].values[i])


def _mcc_at(thresholds, tp, fp, total_pos, n, at: float, undefined: str) -> float:
    """MCC of predicting ``score >= at``, read off the curve counts."""
    i = int(np.searchsorted(thresholds, at, side="left"))
    tp_i, fp_i = (int(tp[i]), int(fp[i])) if i < len(thresholds) else (0, 0)
    return _mcc_counts(tp_i, fp_i, total_pos, n, undefined)


def _mcc_counts(tp: int, fp: int, total_pos: int, n: int, undefined: str) -> float:
    t = _curve_tensor(np.array([0.0]), np.array([tp]), np.array([fp]), total_pos, n)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        return float(m.mcc(t, undefined=undefined).values[0])


@dataclass(frozen=True)
class LabelSweep:
    """The sweep of one label (or of a binary problem).

    Attributes
    ----------
    label : object
        Label name (None for a binary sweep).
    curve : xarray.Dataset
        Figures at every distinct threshold (see :func:`threshold_curve`).
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
    """

    label: object
    curve: xr.Dataset
    n_thresholds: int
    best_threshold: float
    best_mcc: float
    at_threshold: float | None
    mcc_at: float | None
    crossfold: xr.Dataset | None
    crossfold_mcc: float | None

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
    Each label's scores are sorted once; the cross-fold curves reuse that order
    (a subset of a sorted array is sorted), so J folds cost J linear passes,
    not J sorts. For fold :math:`j`,

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
    order = np.argsort(s)[::-1]
    ys, ss = y[order], s[order]
    counts = _curve_counts(ys, ss)
    curve = _figures(_curve_tensor(*counts), undefined)
    where = "" if name is None else f"label {name!r}: "
    reason = _degenerate(counts)
    if reason:
        notes.append(f"{where}MCC is undefined at every threshold ({reason}); "
                     f"reported as {'0.0' if undefined == 'zero' else 'NaN'}")
    best_t, best_mcc = _best(curve)
    mcc_at = None if at is None else _mcc_at(*counts, at, undefined)
    crossfold = crossfold_mcc = None
    if codes is not None:
        cs = codes[order]
        chosen, held, sizes = [], [], []
        for j in range(len(fold_labels)):
            train = cs != j
            inner = _curve_counts(ys[train], ss[train])
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", UndefinedMetricWarning)
                theta, _ = _best(xr.Dataset({"mcc": m.mcc(_curve_tensor(*inner), undefined=undefined)},
                                            coords={THRESHOLD: inner[0]}))
            test = ~train
            yt, st = ys[test], ss[test]
            pred = st >= theta
            tp = int(np.count_nonzero(yt & pred))
            fp = int(np.count_nonzero(pred)) - tp
            chosen.append(theta)
            held.append(_mcc_counts(tp, fp, int(yt.sum()), int(yt.size), undefined))
            sizes.append(int(yt.size))
        crossfold = xr.Dataset({"threshold": (FOLD, np.array(chosen)),
                                "mcc": (FOLD, np.array(held)), "n": (FOLD, np.array(sizes))},
                               coords={FOLD: fold_labels})
        crossfold_mcc = float(np.mean(held))
    return LabelSweep(label=name, curve=curve, n_thresholds=int(curve.sizes[THRESHOLD]),
                      best_threshold=best_t, best_mcc=best_mcc, at_threshold=at, mcc_at=mcc_at,
                      crossfold=crossfold, crossfold_mcc=crossfold_mcc)


def _degenerate(counts) -> str:
    thresholds, _, _, total_pos, n = counts
    if total_pos == 0:
        return "no positives"
    if total_pos == n:
        return "no negatives"
    if len(thresholds) == 1:
        return "the score is constant"
    return ""

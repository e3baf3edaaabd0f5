r"""Score sweeps: the confusion matrix at every distinct threshold, in one sort.

A threshold :math:`\theta` predicts positive every sample with score
:math:`\ge \theta`; higher scores mean positive. Sorting the scores once and
taking cumulative counts gives TP, FP, FN and TN at every distinct score value,
ties included exactly. The curve is an ordinary confusion tensor with a leading
``threshold`` dim, so MCC, accuracy, F1, recall and precision come from
:mod:`foldcorr.metrics` unchanged. The cross-fold choice picks, for each fold,
the threshold that maximises MCC on the *other* folds and scores it on the
held-out fold, which removes the optimism of the in-sample best. The sort
and the counts behind it are :mod:`foldcorr.analysis.score_counts`.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr import metrics as m
from foldcorr.errors import InvalidInputError, UndefinedMetricWarning, check_choice
from foldcorr.analysis.score_counts import (
    ScoreGrid, best_index, check_scores, check_truth, crossfold_thresholds, curve_counts,
    fp_and_mcc, mcc_counts,
)
from foldcorr.tensor import ACTUAL, CLASS, COUNT, PREDICTED

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

__all__ = ["threshold_curve", "sweep", "LabelSweep", "SweepResult", "THRESHOLD", "CURVE_POINTS"]

#: Name of the threshold dim of a curve.
THRESHOLD = "threshold"

#: Thresholds (about) at which :attr:`LabelSweep.fold_curves` keeps each fold's MCC.
CURVE_POINTS = 2000

BINARY = [False, True]


def _curve_tensor(thresholds, tp, fp, total_pos, n) -> xr.DataArray:
    fn = total_pos - tp
    tn = (n - total_pos) - fp
    cells = np.stack([np.stack([tn, fp], -1), np.stack([fn, tp], -1)], -2)
    return xr.DataArray(cells, dims=(THRESHOLD, ACTUAL, PREDICTED),
                        coords={THRESHOLD: thresholds, ACTUAL: BINARY, PREDICTED: BINARY},
                        name=COUNT)


def threshold_curve(truth: ArrayLike, scores: ArrayLike, *, undefined: str = "zero") -> xr.Dataset:
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
    y = check_truth(truth, "truth")
    s = check_scores(scores, "scores")
    if y.ndim != 1 or s.shape != y.shape:
        raise InvalidInputError(
            f"truth and scores must be 1-D of the same length; got shapes {y.shape!r} and "
            f"{s.shape!r}")
    grid, tp, fp, total_pos, n = curve_counts(y, s)
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


def _mcc_at(grid: ScoreGrid, tp, fp, total_pos, n, at: float, undefined: str) -> float:
    """MCC of predicting ``score >= at``, read off the curve counts."""
    i = int(np.searchsorted(grid.thresholds, at, side="left"))
    tp_i, fp_i = (tp[i], fp[i]) if i < len(grid.thresholds) else (0, 0)
    return float(mcc_counts(tp_i, fp_i, total_pos, n, undefined)[0])


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
    fold_curves : xarray.DataArray or None
        Dims ``fold, threshold``: each fold's own MCC at up to about
        :data:`CURVE_POINTS` thresholds (evenly spaced in curve order, plus the
        in-sample best and every cross-fold choice), for drawing; None without
        folds.
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
    fold_curves: xr.DataArray | None = None
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

    def _repr_html_(self) -> str:
        from foldcorr.report.notebook import html_fragment  # rendering lives in the report layer

        return html_fragment(self)

    def plot(self, kind: str = "threshold", ax=None, **options):
        """Draw one plot of this result with matplotlib (the ``plot`` extra).

        Parameters
        ----------
        kind : str, default "threshold"
            A plot of ``foldcorr.report.plots.PLOTS["SweepResult"]``.
        ax : matplotlib.axes.Axes, optional
            Draw there and return it; without it, a new figure is returned,
            which shows itself inline in a notebook.
        **options
            Options of the plot function (``docs/plots.md``).

        Raises
        ------
        OptionError
            On a kind this result has no plot for.
        MissingDependencyError
            When matplotlib is not installed.

        Examples
        --------
        >>> r = sweep([0, 1, 1, 0, 1, 0], [0.1, 0.8, 0.6, 0.3, 0.4, 0.5], folds=[1, 1, 1, 2, 2, 2])
        >>> r.plot(companions=["f1"]).axes[0].get_ylabel()
        'MCC'
        """
        from foldcorr.report.plots import plot  # drawing lives in the report layer

        return plot(self, kind, ax=ax, **options)

    def __repr__(self) -> str:
        folds = f", {len(self.folds)} folds" if self.folds else ""
        return (f"SweepResult({len(self.labels)} labels, n={self.n}{folds}, "
                f"{len(self.warnings)} warnings)")


def sweep(truth: ArrayLike, scores: ArrayLike, *, labels: Sequence | None = None,
          folds: ArrayLike | None = None,
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
    y = check_truth(truth, "truth")
    s = check_scores(scores, "scores")
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
        at = float(check_scores([at], "`at`")[0])
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
    grid = ScoreGrid(s, y)
    tp, total_pos, n = grid.tp, grid.total_pos, grid.n
    fp, mcc = fp_and_mcc(grid, undefined)
    reason = _degenerate(grid, total_pos, n)
    if reason:
        where = "" if name is None else f"label {name!r}: "
        notes.append(f"{where}MCC is undefined at every threshold ({reason}); "
                     f"reported as {'0.0' if undefined == 'zero' else 'NaN'}")
    i = best_index(mcc)
    best_t, best_mcc = (float(grid.thresholds[i]), float(mcc[i])) if i >= 0 else (np.nan, np.nan)
    mcc_at = None if at is None else _mcc_at(grid, tp, fp, total_pos, n, at, undefined)
    crossfold = crossfold_mcc = curves = None
    if codes is not None:
        crossfold = crossfold_thresholds(grid, tp, s, y, total_pos, codes, fold_labels, undefined,
                                         points=_curve_points(grid.thresholds.size, i))
        curves = crossfold["fold_mcc"].rename(point=THRESHOLD).swap_dims(
            {THRESHOLD: "point_threshold"}).rename(point_threshold=THRESHOLD)
        curves = curves.rename("mcc")
        crossfold = crossfold.drop_vars(["fold_mcc", "point_threshold"])
        crossfold_mcc = float(crossfold["mcc"].mean())
    return LabelSweep(label=name, n_thresholds=int(grid.thresholds.size),
                      best_threshold=best_t, best_mcc=best_mcc, at_threshold=at, mcc_at=mcc_at,
                      crossfold=crossfold, crossfold_mcc=crossfold_mcc, undefined=undefined,
                      fold_curves=curves, _counts=(grid.thresholds, tp, fp, mcc, total_pos, n))


def _curve_points(size: int, best: int) -> np.ndarray:
    """Indices of the thresholds kept for the fold curves: evenly spaced, plus the best."""
    if size == 0:
        return np.empty(0, dtype=np.intp)
    spaced = np.linspace(0, size - 1, min(size, CURVE_POINTS)).round().astype(np.intp)
    return np.unique(np.append(spaced, best)) if best >= 0 else np.unique(spaced)


def _degenerate(grid: ScoreGrid, total_pos: int, n: int) -> str:
    if total_pos == 0:
        return "no positives"
    if total_pos == n:
        return "no negatives"
    if grid.thresholds.size == 1:
        return "the score is constant"
    return ""

r"""Multilabel tensors: one 2 x 2 confusion tensor per label, and their intervals.

A multilabel tensor is an ordinary confusion tensor with K = 2 and a leading
``label`` dim: dims ``(..., "label", "actual", "predicted")`` with the
coordinates ``[False, True]`` on both class dims. Every binary figure is then a
metric of :mod:`foldcorr.metrics` broadcast over ``label``: micro averaging
sums the tensor over ``label`` before the metric, macro averaging takes the
mean after it. :func:`foldcorr.evaluation.evaluate` recognises such a tensor
and computes its figures; nothing here reads files or prints.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr import metrics as m
from foldcorr.errors import InvalidInputError, UndefinedMetricWarning
from foldcorr.tensor import ACTUAL, COUNT, FOLD, LABEL, PREDICTED, validate_tensor

__all__ = [
    "multilabel_tally",
    "indicators_from_sets",
    "multilabel_intervals",
    "MultilabelIntervals",
]

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


def multilabel_tally(truth, pred, *, labels: Sequence | None = None, folds=None,
                     weights=None) -> xr.DataArray:
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


def _positive(da: xr.DataArray) -> xr.DataArray:
    return da.sel({m.CLASS: True}, drop=True)


def _check_multilabel(t) -> xr.DataArray:
    t = validate_tensor(t)
    if LABEL not in t.dims:
        raise InvalidInputError(f"a multilabel tensor needs a 'label' dim; got dims {t.dims!r}")
    classes = t.coords[ACTUAL].values.tolist()
    if classes != BINARY:
        raise InvalidInputError(
            f"a multilabel tensor has class coordinates [False, True]; got {classes!r}")
    other = [d for d in t.dims if d not in (FOLD, LABEL, ACTUAL, PREDICTED)]
    if other:
        raise InvalidInputError(f"select or pool the dims {other!r} first; "
                                "accepted dims are (fold, label, actual, predicted)")
    return t.transpose(*[d for d in (FOLD, LABEL) if d in t.dims], ACTUAL, PREDICTED)


def _macro(per_label_mcc: xr.DataArray, present: xr.DataArray, undefined: str) -> xr.DataArray:
    """Mean MCC over the labels present; undefined where no label is present.

    A present label whose MCC is NaN (``undefined="nan"``) makes the mean NaN,
    as :func:`foldcorr.metrics.macro_mcc` does: ``skipna=False``.
    """
    k = present.sum(LABEL)
    total = per_label_mcc.where(present, 0.0).sum(LABEL, skipna=False)
    value = np.nan if undefined == "nan" else 0.0
    return xr.where(k > 0, total / k.where(k > 0, 1), value)


def _weighted_sum(weight: xr.DataArray, mcc: xr.DataArray) -> xr.DataArray:
    """Sum over labels of weight x MCC; NaN when a label with weight has a NaN MCC.

    A label with no support has weight 0 and adds nothing, whatever its MCC.
    """
    return (weight * mcc.where(weight > 0, 0.0)).sum(LABEL, skipna=False)


@dataclass(frozen=True)
class MultilabelIntervals:
    """Bootstrap intervals of the multilabel figures.

    Attributes
    ----------
    per_label : xarray.Dataset
        Dim ``label``: ``estimate``, ``low`` and ``high`` of each label's MCC.
    micro_mcc, macro_mcc, weighted_mcc : tuple of float
        ``(low, high)`` of each average.
    level : float
        Confidence level.
    method : str
        ``"percentile"`` or ``"bca"``.
    n_resamples : int
        Number of resamples.
    seed : int or None
        The seed given (None when not fixed).
    warnings : tuple of str
        Undefined values met in the resamples.
    """

    per_label: xr.Dataset
    micro_mcc: tuple[float, float]
    macro_mcc: tuple[float, float]
    weighted_mcc: tuple[float, float]
    level: float
    method: str
    n_resamples: int
    seed: object = None
    warnings: tuple[str, ...] = ()

    def label_interval(self, label) -> tuple[float, float]:
        """``(low, high)`` of one label's MCC."""
        row = self.per_label.sel({LABEL: label})
        return float(row["low"]), float(row["high"])


def _micro(x, *, undefined="zero"):
    return m.mcc(x.sum(LABEL), undefined=undefined)


def _macro_of(x, *, undefined="zero"):
    present = (_positive(m.support(x)) + _positive(m.predicted_count(x))) > 0
    return _macro(m.mcc(x, undefined=undefined), present, undefined)


def _weighted_of(x, *, undefined="zero"):
    weight = _positive(m.support(x)).astype(float)
    total = weight.sum(LABEL)
    value = _weighted_sum(weight, m.mcc(x, undefined=undefined))
    return xr.where(total > 0, value / total.where(total > 0, 1), 0.0 if undefined == "zero"
                    else np.nan)


def multilabel_intervals(t, *, n_resamples: int = 2000, level: float = 0.95,
                         method: str = "percentile", seed=None,
                         undefined: str = "zero") -> MultilabelIntervals:
    r"""Bootstrap intervals of per-label, micro, macro and support-weighted MCC.

    Parameters
    ----------
    t : xarray.DataArray
        Multilabel tensor with whole counts, dims ``([fold,] label, actual, predicted)``.
    n_resamples : int, default 2000
        Resamples (at least 100).
    level : float, default 0.95
        Confidence level.
    method : {"percentile", "bca"}, default "percentile"
        Interval method (see :func:`foldcorr.analysis.uncertainty.bootstrap`).
    seed : int, numpy.random.Generator or None
        Seed; the same seed gives the same intervals.
    undefined : {"zero", "nan"}, default "zero"
        Convention for undefined values in the resamples.

    Returns
    -------
    MultilabelIntervals

    Raises
    ------
    InvalidInputError
        When ``t`` is not a multilabel tensor.
    InvalidTensorError, OptionError
        As :func:`foldcorr.analysis.uncertainty.bootstrap` (weighted tensors, bad options).

    Notes
    -----
    :func:`foldcorr.analysis.uncertainty.bootstrap` draws each slice of the tensor (each
    fold and each label) as :math:`\mathrm{Multinomial}(N, C/N)` on its own,
    and the statistic is applied to every resampled tensor at once. For one
    label that is exactly the distribution of resampling the samples, so the
    per-label intervals are exact bootstrap intervals. The micro, macro and
    weighted MCC combine labels that were resampled independently: the
    tensor does not record which labels occur together on a sample, so the
    co-occurrence of labels is not carried into the resamples. Where labels
    are positively correlated across samples those three intervals are
    somewhat too narrow.

    Examples
    --------
    >>> t = multilabel_tally([[1, 0], [1, 1], [0, 1], [0, 0]] * 10,
    ...                      [[1, 0], [0, 1], [0, 1], [0, 0]] * 10, labels=["gull", "tern"])
    >>> ci = multilabel_intervals(t, n_resamples=200, seed=3)
    >>> ci.per_label["low"].dims, ci.micro_mcc[0] < ci.micro_mcc[1]
    (('label',), True)
    """
    from functools import partial

    from foldcorr.analysis.uncertainty import bootstrap

    t = _check_multilabel(t)
    common = {"n_resamples": n_resamples, "level": level, "method": method}
    notes: list[str] = []
    results = {}
    for key, stat in (("per_label", partial(m.mcc, undefined=undefined)),
                      ("micro_mcc", partial(_micro, undefined=undefined)),
                      ("macro_mcc", partial(_macro_of, undefined=undefined)),
                      ("weighted_mcc", partial(_weighted_of, undefined=undefined))):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UndefinedMetricWarning)
            res = bootstrap(t, stat, seed=seed, **common)
        results[key] = res
        notes.extend(f"intervals ({key}): {w}" for w in res.warnings)
    per = results["per_label"]
    first = results["micro_mcc"]
    return MultilabelIntervals(
        per_label=xr.Dataset({"estimate": per.estimate, "low": per.low, "high": per.high}),
        micro_mcc=(float(first.low), float(first.high)),
        macro_mcc=(float(results["macro_mcc"].low), float(results["macro_mcc"].high)),
        weighted_mcc=(float(results["weighted_mcc"].low), float(results["weighted_mcc"].high)),
        level=float(first.level), method=first.method, n_resamples=int(first.n_resamples),
        seed=seed if seed is None or isinstance(seed, int) else None,
        warnings=tuple(dict.fromkeys(notes)),
    )

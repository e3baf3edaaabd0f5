r"""Multilabel intervals: bootstrap intervals per label and of the label averages.

A multilabel tensor (see :mod:`foldcorr.tensor.multilabel`) is an ordinary
confusion tensor with K = 2 and a leading ``label`` dim; every binary figure is
a metric of :mod:`foldcorr.metrics` broadcast over ``label``.
:func:`foldcorr.evaluation.evaluate` recognises such a tensor and computes its
figures; this module adds the intervals. Nothing here reads files or prints.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import xarray as xr

from foldcorr import metrics as m
from foldcorr.errors import InvalidInputError, UndefinedMetricWarning
from foldcorr.tensor import ACTUAL, BINARY, FOLD, LABEL, PREDICTED, validate_tensor

__all__ = [
    "multilabel_intervals",
    "MultilabelIntervals",
]

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
    >>> from foldcorr.tensor import multilabel_tally
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

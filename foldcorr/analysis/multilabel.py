r"""Multilabel evaluation: one 2 x 2 confusion tensor per label.

A multilabel tensor is an ordinary confusion tensor with K = 2 and a leading
``label`` dim: dims ``(..., "label", "actual", "predicted")`` with the
coordinates ``[False, True]`` on both class dims. Every binary figure is then a
metric of :mod:`foldcorr.metrics` broadcast over ``label``: micro averaging
sums the tensor over ``label`` before the metric, macro averaging takes the
mean after it. Nothing here reads files or prints.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field, replace

import numpy as np
import xarray as xr

from foldcorr import metrics as m
from foldcorr.errors import InvalidInputError, UndefinedMetricWarning, check_choice, collect_undefined
from foldcorr.tensor import ACTUAL, BINARY, FOLD, LABEL, PREDICTED, validate_tensor
from foldcorr.tensor import multilabel_tally  # noqa: F401 (the examples below count with it)

__all__ = [
    "evaluate_multilabel",
    "MultilabelEvaluation",
    "multilabel_intervals",
    "MultilabelIntervals",
]

@dataclass(frozen=True)
class MultilabelEvaluation:
    """Every figure of a multilabel evaluation.

    Attributes
    ----------
    tensor : xarray.DataArray
        The tensor evaluated, dims ``([fold,] label, actual, predicted)``.
    per_label : xarray.Dataset
        Dim ``label`` (pooled over folds), sorted so the labels that cost the
        most come first: ``support`` (actual positives), ``predicted``
        (predicted positives), ``prevalence`` (support / n), ``mcc``,
        ``recall``, ``precision`` (of the positive class) and ``cost``
        (``(1 - mcc) * support``, the sort key).
    n : float
        Number (or total weight) of samples.
    micro_mcc, macro_mcc, weighted_mcc : float
        MCC of the tensor summed over labels; mean MCC over labels present in
        truth or predictions; support-weighted mean MCC.
    folds : xarray.Dataset or None
        Dim ``fold``: ``n``, ``micro_mcc`` and ``macro_mcc``; None without folds.
    warnings : tuple of str
        Undefined values, in plain language, naming label and fold.
    undefined : str
        The convention used for undefined values.
    extras : dict
        Sections attached by analyses (for example interval estimates).
    """

    tensor: xr.DataArray
    per_label: xr.Dataset
    n: float
    micro_mcc: float
    macro_mcc: float
    weighted_mcc: float
    folds: xr.Dataset | None
    warnings: tuple[str, ...]
    undefined: str = "zero"
    extras: dict = field(default_factory=dict)

    @property
    def labels(self) -> list:
        """Labels in tensor order."""
        return self.tensor.coords[LABEL].values.tolist()

    def with_extra(self, name: str, value) -> MultilabelEvaluation:
        """A copy with one more section in :attr:`extras` (and its warnings, if it has any).

        Examples
        --------
        >>> ev = evaluate_multilabel(multilabel_tally([[1, 0], [0, 1]], [[1, 0], [0, 1]]))
        >>> sorted(ev.with_extra("note", 1).extras)
        ['note']
        """
        more = tuple(getattr(value, "warnings", ()) or ())
        return replace(self, extras={**self.extras, name: value},
                       warnings=tuple(dict.fromkeys(self.warnings + more)))

    def __rich__(self):
        from foldcorr.report.multilabel import multilabel_report  # rendering is the report layer
        from foldcorr.report.text import render_rich

        return render_rich(multilabel_report(self))


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


def _positive_ratio(num: xr.DataArray, den: xr.DataArray, what: str, undefined: str):
    bad = den == 0
    if bool(bad.any()):
        where = ", ".join(repr(v) for v in den[LABEL].values[bad.values])
        value = "0.0" if undefined == "zero" else "NaN"
        warnings.warn(f"{what} is undefined (0/0) for label {where}; reported as {value}",
                      UndefinedMetricWarning, stacklevel=3)
    fill = 0.0 if undefined == "zero" else np.nan
    return xr.where(bad, fill, num / den.where(~bad, 1))


def evaluate_multilabel(t, *, undefined: str = "zero") -> MultilabelEvaluation:
    r"""Per-label, micro, macro, support-weighted and per-fold MCC of a multilabel tensor.

    Parameters
    ----------
    t : xarray.DataArray
        Multilabel tensor, dims ``([fold,] label, actual, predicted)`` (see
        :func:`multilabel_tally`).
    undefined : {"zero", "nan"}, default "zero"
        Value of undefined figures (a label with no positives in truth or in
        predictions has MCC 0/0); each is also named in ``warnings``.

    Returns
    -------
    MultilabelEvaluation

    Raises
    ------
    InvalidInputError
        When ``t`` is not a multilabel tensor.

    Notes
    -----
    With :math:`C_\ell` the 2 x 2 matrix of label :math:`\ell` and
    :math:`\mathrm{MCC}` the metric :func:`foldcorr.metrics.mcc`:

    .. math::
        \mathrm{micro} = \mathrm{MCC}\Big(\sum_\ell C_\ell\Big), \quad
        \mathrm{macro} = \frac{1}{|P|}\sum_{\ell \in P} \mathrm{MCC}(C_\ell), \quad
        \mathrm{weighted} = \frac{\sum_\ell n^+_\ell \mathrm{MCC}(C_\ell)}{\sum_\ell n^+_\ell}

    where :math:`P` is the set of labels with a positive in truth or
    predictions and :math:`n^+_\ell` the support of label :math:`\ell`. Labels
    are sorted by cost :math:`(1 - \mathrm{MCC}_\ell)\, n^+_\ell`, largest first
    (an undefined MCC counts as 0 here), ties in label order.

    Examples
    --------
    >>> t = multilabel_tally([[1, 0], [1, 1], [0, 1], [0, 0]],
    ...                      [[1, 0], [0, 1], [0, 1], [0, 0]], labels=["gull", "tern"])
    >>> ev = evaluate_multilabel(t)
    >>> ev.per_label["label"].values.tolist(), ev.per_label["mcc"].round(4).values.tolist()
    (['gull', 'tern'], [0.5774, 1.0])
    >>> round(ev.micro_mcc, 4), round(ev.macro_mcc, 4)
    (0.7746, 0.7887)
    """
    check_choice("undefined", undefined, m.UNDEFINED_CHOICES)
    t = _check_multilabel(t)
    notes: list[str] = []
    pooled = t.sum(FOLD) if FOLD in t.dims else t
    per_label = collect_undefined(notes, "per label", lambda: _per_label(pooled, undefined))
    n_total = float(pooled.isel({LABEL: 0}).sum()) if pooled.sizes[LABEL] else 0.0
    micro = collect_undefined(notes, "micro", lambda: m.mcc(pooled.sum(LABEL), undefined=undefined))
    present = (per_label["support"] + per_label["predicted"]) > 0
    macro = _macro(per_label["mcc"], present, undefined)
    weight = per_label["support"].astype(float)
    weighted = _ratio_scalar(float(_weighted_sum(weight, per_label["mcc"])), float(weight.sum()),
                             undefined, notes, "support-weighted MCC (no label has a positive)")
    folds = None
    if FOLD in t.dims:
        folds = collect_undefined(notes, "per fold", lambda: _per_fold(t, undefined))
    cost = ((1 - per_label["mcc"].fillna(0.0)) * per_label["support"]).rename("cost")
    per_label = per_label.assign(cost=cost)
    order = np.lexsort((np.arange(cost.size), -cost.values))
    return MultilabelEvaluation(
        tensor=t,
        per_label=per_label.isel({LABEL: order}),
        n=_num(n_total),
        micro_mcc=float(micro),
        macro_mcc=float(macro),
        weighted_mcc=weighted,
        folds=folds,
        warnings=tuple(dict.fromkeys(notes)),
        undefined=undefined,
    )


def _num(v: float):
    return int(v) if float(v).is_integer() else float(v)


def _weighted_sum(weight: xr.DataArray, mcc: xr.DataArray) -> xr.DataArray:
    """Sum over labels of weight x MCC; NaN when a label with weight has a NaN MCC.

    A label with no support has weight 0 and adds nothing, whatever its MCC.
    """
    return (weight * mcc.where(weight > 0, 0.0)).sum(LABEL, skipna=False)


def _ratio_scalar(num, den, undefined, notes, what) -> float:
    if den == 0:
        notes.append(f"{what} is undefined; reported as {'0.0' if undefined == 'zero' else 'NaN'}")
        return 0.0 if undefined == "zero" else float("nan")
    return num / den


def _per_label(t: xr.DataArray, undefined: str) -> xr.Dataset:
    support = _positive(m.support(t))
    predicted = _positive(m.predicted_count(t))
    tp = t.sel({ACTUAL: True, PREDICTED: True}, drop=True)
    n = t.sum((ACTUAL, PREDICTED))
    return xr.Dataset({
        "support": support,
        "predicted": predicted,
        "prevalence": support / n.where(n > 0, 1),
        "mcc": m.mcc(t, undefined=undefined),
        "recall": _positive_ratio(tp, support, "recall", undefined),
        "precision": _positive_ratio(tp, predicted, "precision", undefined),
    })


def _per_fold(t: xr.DataArray, undefined: str) -> xr.Dataset:
    per_label = m.mcc(t, undefined=undefined)
    present = (_positive(m.support(t)) + _positive(m.predicted_count(t))) > 0
    return xr.Dataset({
        "n": t.isel({LABEL: 0}).sum((ACTUAL, PREDICTED), keep_attrs=False),
        "micro_mcc": m.mcc(t.sum(LABEL), undefined=undefined),
        "macro_mcc": _macro(per_label, present, undefined),
    })


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

r"""The metrics layer: pure functions from confusion tensors to labelled figures.

Every function takes a confusion tensor (see :mod:`foldcorr.tensor`), reduces
over ``actual`` and ``predicted``, and broadcasts over every other dim. Per-class
figures carry a new dim ``class``. Nothing here reads files, prints or draws
random numbers.

Notation for one K x K matrix C (rows actual, columns predicted): :math:`s` is
the total, :math:`c` the trace, :math:`t_k` the row sums and :math:`p_k` the
column sums. Sums are float64 over a power-of-two scale (:class:`Sums`), so no
product overflows; R_K's numerator is exact where float64 would cancel. Every figure is made of those margins and the trace (and
the largest off-diagonal cells), computed from the tensor's backing in
O(nonzero cells + folds x K), dense or sparse (:mod:`foldcorr.tensor.backing`);
no dense K x K copy is made.

Undefined values (0/0) follow the ``undefined`` convention: ``"zero"`` (the
default, the limit commonly used and what scikit-learn returns) or ``"nan"``.
Either way an :class:`~foldcorr.errors.UndefinedMetricWarning` names where.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from functools import cached_property

import numpy as np
import xarray as xr

from foldcorr.errors import UndefinedMetricWarning, check_choice
from foldcorr.tensor import (ACTUAL, CLASS, PREDICTED, as_dense, cell_sums, integer_sums, py_value,
                             sum_cells, top_off_diagonal, validate_tensor)

__all__ = [
    "UNDEFINED_CHOICES",
    "MAX_PLACES",
    "SUMMARY_FIGURES",
    "Sums",
    "rk_parts",
    "correlation",
    "rk",
    "mcc",
    "ovr_mcc",
    "accuracy",
    "balanced_accuracy",
    "cohen_kappa",
    "recall",
    "precision",
    "f1",
    "macro_f1",
    "macro_mcc",
    "support",
    "predicted_count",
    "count_total",
    "top_confusion",
]

UNDEFINED_CHOICES = ("zero", "nan")

#: Places an undefined-value warning names before it says how many more there are.
MAX_PLACES = 50


@dataclass(frozen=True)
class Sums:
    """Float64 s, c, diagonal, t_k (``actual``), p_k (``predicted``) over ``scale``; labels.

    ``scale`` is 1 unless the largest total is outside [2^-256, 2^256], else the power
    of two taking it to [1, 2): products never overflow and figures are scale-free.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> s = Sums.of(confusion_tensor([[3, 1], [0, 4]], ["a", "b"]))
    >>> float(s.total), float(s.trace), s.actual.tolist(), s.predicted.tolist(), s.scale
    (8.0, 7.0, [4.0, 4.0], [3.0, 5.0], 1.0)
    """

    tensor: xr.DataArray
    total: np.ndarray  # (...)
    trace: np.ndarray  # (...)
    diag: np.ndarray  # (..., K)
    actual: np.ndarray  # (..., K) row sums t_k
    predicted: np.ndarray  # (..., K) column sums p_k
    scale: float = 1.0

    @classmethod
    def of(cls, t) -> Sums:
        t = validate_tensor(t)
        diag, actual, predicted = cell_sums(t)
        top = float(actual.sum(axis=-1).max(initial=0.0))
        scale = 2.0 ** np.floor(np.log2(top)) if top and not 2**-256 <= top <= 2**256 else 1.0
        diag, actual, predicted = diag / scale, actual / scale, predicted / scale
        return cls(tensor=t, total=actual.sum(axis=-1), trace=diag.sum(axis=-1), diag=diag,
                   actual=actual, predicted=predicted, scale=scale)

    @cached_property
    def cells(self) -> np.ndarray:
        """Every cell in float64 over ``scale``, (..., K, K), dense (``as_dense``)."""
        return as_dense(self.tensor).values.astype(np.float64) / self.scale

    def rk_parts(self):
        """:func:`rk_parts` of the tensor; N from exact integers where float64 would cancel
        (integer counts, and N below 2^-40 c s or s above 2^26)."""
        num, dp, dt = rk_parts(self.trace, self.total, self.actual, self.predicted)
        exact = (np.abs(num) <= 2.0**-40 * self.trace * self.total) | (self.total > 2**26)
        if np.any(exact) and (ints := integer_sums(self.tensor)) is not None:
            whole = np.array(ints[0] * ints[1] - (ints[2] * ints[3]).sum(axis=-1), dtype=float)
            num = np.where(exact, whole / self.scale**2, num)
        return num, dp, dt

    def spread_actual(self) -> np.ndarray:
        """b_k = t_k (s - t_k), per class."""
        return self.actual * (self.total[..., None] - self.actual)

    def spread_predicted(self) -> np.ndarray:
        """a_k = p_k (s - p_k), per class."""
        return self.predicted * (self.total[..., None] - self.predicted)


def rk_parts(trace, total, actual, predicted):
    """R_K's N = c s - sum t_k p_k, D_p = sum p_k (s - p_k), D_t = sum t_k (s - t_k).

    R_K = N / sqrt(D_p D_t) (Gorodkin 2004), for any margins that broadcast (class axis last).

    Examples
    --------
    >>> import numpy as np
    >>> num, dp, dt = rk_parts(7.0, 8.0, np.array([4.0, 4.0]), np.array([3.0, 5.0]))
    >>> float(num), float(dp), float(dt)
    (24.0, 30.0, 32.0)
    """
    s = np.asarray(total, dtype=np.float64)[..., None]
    num = trace * total - (actual * predicted).sum(axis=-1)
    dp = (predicted * (s - predicted)).sum(axis=-1)
    dt = (actual * (s - actual)).sum(axis=-1)
    return num, dp, dt


def correlation(num, dp, dt, undefined: str):
    """num / sqrt(dp dt) clipped to [-1, 1], the convention where 0/0; and the 0/0 mask.

    Examples
    --------
    >>> import numpy as np
    >>> value, bad = correlation(np.array([24.0, 1.0]), np.array([30.0, 0.0]),
    ...                          np.array([32.0, 4.0]), "zero")
    >>> value.round(4).tolist(), bad.tolist()
    ([0.7746, 0.0], [False, True])
    """
    den = np.sqrt(np.maximum(dp, 0.0)) * np.sqrt(np.maximum(dt, 0.0))
    bad = den == 0
    with np.errstate(divide="ignore", invalid="ignore"):
        value = np.clip(num / np.where(bad, 1.0, den), -1.0, 1.0)
    fill = 0.0 if undefined == "zero" else np.nan
    return np.where(bad, fill, value), bad


def _lead(t: xr.DataArray):
    dims = [d for d in t.dims if d not in (ACTUAL, PREDICTED)]
    coords = {d: t.coords[d] for d in dims if d in t.coords}
    return dims, coords


def _wrap(sums: Sums, values: np.ndarray, name: str, *, per_class: bool = False):
    dims, coords = _lead(sums.tensor)
    if per_class:
        dims = [*dims, CLASS]
        coords = {**coords, CLASS: sums.tensor.coords[ACTUAL].values}
    return xr.DataArray(values, dims=dims, coords=coords, name=name)


def _ratio(num, den, sums: Sums, what: str, undefined: str, *, per_class=False):
    """num / den with the undefined convention applied where den == 0."""
    check_choice("undefined", undefined, UNDEFINED_CHOICES)
    num, den = np.broadcast_arrays(np.asarray(num, float), np.asarray(den, float))
    bad = den == 0
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(bad, 0.0 if undefined == "zero" else np.nan, num / np.where(bad, 1, den))
    if bad.any():
        _warn_undefined(sums, bad, what, undefined, per_class=per_class)
    return out


def _warn_undefined(sums: Sums, bad: np.ndarray, what: str, undefined: str, *, per_class,
                    stacklevel: int = 4):
    dims, _ = _lead(sums.tensor)
    names = [*dims, CLASS] if per_class else dims
    labels = [
        sums.tensor.coords[d].values if d in sums.tensor.coords else np.arange(bad.shape[i])
        for i, d in enumerate(dims)
    ]
    if per_class:
        labels.append(sums.tensor.coords[ACTUAL].values)
    spots = np.argwhere(bad)
    places = [
        " ".join(f"{n}={py_value(lab[i])!r}" for n, lab, i in zip(names, labels, index))
        for index in spots[:MAX_PLACES]
    ]
    where = "; ".join(places) if places and places[0] else "the whole tensor"
    if len(spots) > MAX_PLACES:
        where += f"; and {len(spots) - MAX_PLACES} more"
    value = "0.0" if undefined == "zero" else "NaN"
    warning = UndefinedMetricWarning(
        f"{what} is undefined (0/0) at {where}; reported as {value} (undefined={undefined!r})")
    # where, by dim: the labels at which any value is undefined (read by undefined_places)
    warning.places = {n: [py_value(v) for v in np.asarray(lab)[np.unique(spots[:, i])]]
                      for i, (n, lab) in enumerate(zip(names, labels))}
    warnings.warn(warning, stacklevel=stacklevel)


def rk(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    r"""Gorodkin's multiclass correlation R_K (the MCC when K = 2).

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor, dims ``(..., "actual", "predicted")``.
    undefined : {"zero", "nan"}, default "zero"
        Value returned where R_K is 0/0.

    Returns
    -------
    xarray.DataArray
        R_K over the leading dims, named ``rk``.

    Warns
    -----
    UndefinedMetricWarning
        Where all truths or all predictions fall in one class.

    Notes
    -----
    .. math:: R_K = \frac{c\,s - \sum_k t_k p_k}
                         {\sqrt{(s^2 - \sum_k p_k^2)(s^2 - \sum_k t_k^2)}}

    The maximum is +1; for K > 2 the minimum lies between -1 and 0 and depends
    on the class distribution [3]_.

    References
    ----------
    .. [1] J. Gorodkin, "Comparing two K-category assignments by a K-category
       correlation coefficient", Comput. Biol. Chem. 28 (2004) 367-374.
    .. [2] B. W. Matthews, "Comparison of the predicted and observed secondary
       structure of T4 phage lysozyme", BBA 405 (1975) 442-451.
    .. [3] G. Jurman, S. Riccadonna, C. Furlanello, "A comparison of MCC and CEN
       error measures in multi-class prediction", PLoS ONE 7 (2012) e41882.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[6, 2], [1, 3]], ["pos", "neg"])
    >>> round(float(rk(t)), 6)
    0.478091
    """
    check_choice("undefined", undefined, UNDEFINED_CHOICES)
    s = Sums.of(t)
    out, bad = correlation(*s.rk_parts(), undefined)
    if bad.any():
        _warn_undefined(s, bad, "R_K", undefined, per_class=False, stacklevel=3)
    return _wrap(s, out, "rk")


def mcc(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    """Matthews correlation coefficient; an alias of :func:`rk` for 2 x 2 tensors.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> float(mcc(confusion_tensor([[5, 0], [0, 5]], [False, True])))
    1.0
    """
    return rk(t, undefined=undefined).rename("mcc")


def ovr_mcc(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    r"""One-vs-rest MCC of every class.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor.
    undefined : {"zero", "nan"}, default "zero"
        Value where a class is absent from truth or predictions (or is all of
        either).

    Returns
    -------
    xarray.DataArray
        Dims ``(..., "class")``, named ``mcc``.

    Notes
    -----
    .. math:: \mathrm{MCC}_k = \frac{s C_{kk} - t_k p_k}
                                    {\sqrt{p_k (s - p_k)\, t_k (s - t_k)}}

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[4, 1, 0], [0, 3, 1], [1, 0, 5]], ["a", "b", "c"])
    >>> ovr_mcc(t).round(4).values.tolist()
    [0.7, 0.6591, 0.7222]
    """
    check_choice("undefined", undefined, UNDEFINED_CHOICES)
    s = Sums.of(t)
    num = s.total[..., None] * s.diag - s.actual * s.predicted
    out, bad = correlation(num, s.spread_predicted(), s.spread_actual(), undefined)
    if bad.any():
        _warn_undefined(s, bad, "one-vs-rest MCC", undefined, per_class=True, stacklevel=3)
    return _wrap(s, out, "mcc", per_class=True)


def accuracy(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    """Fraction of samples on the diagonal.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> float(accuracy(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])))
    0.75
    """
    s = Sums.of(t)
    return _wrap(s, _ratio(s.trace, s.total, s, "accuracy", undefined), "accuracy")


def recall(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    """Per-class recall C_kk / t_k (undefined where a class has no support).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> recall(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])).values.tolist()
    [0.75, 0.75]
    """
    s = Sums.of(t)
    out = _ratio(s.diag, s.actual, s, "recall", undefined, per_class=True)
    return _wrap(s, out, "recall", per_class=True)


def precision(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    """Per-class precision C_kk / p_k (undefined where a class is never predicted).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> precision(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])).round(4).values.tolist()
    [0.8571, 0.6]
    """
    s = Sums.of(t)
    out = _ratio(s.diag, s.predicted, s, "precision", undefined, per_class=True)
    return _wrap(s, out, "precision", per_class=True)


def f1(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    """Per-class F1 = 2 C_kk / (t_k + p_k).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> f1(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])).round(4).values.tolist()
    [0.8, 0.6667]
    """
    s = Sums.of(t)
    out = _ratio(2 * s.diag, s.actual + s.predicted, s, "F1", undefined, per_class=True)
    return _wrap(s, out, "f1", per_class=True)


def _present_mean(values: np.ndarray, present: np.ndarray, sums, what, undefined):
    num = np.where(present, values, 0.0).sum(axis=-1)
    return _ratio(num, present.sum(axis=-1), sums, what, undefined)


def balanced_accuracy(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    """Mean recall over the classes that occur in truth.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> float(balanced_accuracy(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])))
    0.75
    """
    s = Sums.of(t)
    with np.errstate(divide="ignore", invalid="ignore"):
        per_class = s.diag / s.actual
    out = _present_mean(per_class, s.actual > 0, s, "balanced accuracy", undefined)
    return _wrap(s, out, "balanced_accuracy")


def macro_f1(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    """Mean F1 over the classes that occur in truth or predictions.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> round(float(macro_f1(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))), 4)
    0.7333
    """
    s = Sums.of(t)
    present = (s.actual + s.predicted) > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        per_class = 2 * s.diag / (s.actual + s.predicted)
    return _wrap(s, _present_mean(per_class, present, s, "macro F1", undefined), "macro_f1")


def macro_mcc(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    """Mean one-vs-rest MCC over the classes that occur in truth or predictions.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[4, 1, 0], [0, 3, 1], [1, 0, 5]], ["a", "b", "c"])
    >>> round(float(macro_mcc(t)), 4)
    0.6938
    """
    s = Sums.of(t)
    per_class = ovr_mcc(s.tensor, undefined=undefined).values
    present = (s.actual + s.predicted) > 0
    return _wrap(s, _present_mean(per_class, present, s, "macro MCC", undefined), "macro_mcc")


def cohen_kappa(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    r"""Cohen's kappa, :math:`(c s - \sum t_k p_k) / (s^2 - \sum t_k p_k)`.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> round(float(cohen_kappa(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))), 6)
    0.470588
    """
    s = Sums.of(t)
    chance = (s.actual * s.predicted).sum(axis=-1)
    out = _ratio(s.trace * s.total - chance, s.total**2 - chance, s, "Cohen's kappa", undefined)
    return _wrap(s, out, "kappa")


def _count_sum(t: xr.DataArray, dims) -> xr.DataArray:
    """Sum counts over ``dims`` without int64 overflow.

    Integer counts stay int64 while the total is surely below 2**63 (the
    float64 sum is below 2**62, and counts are non-negative so no partial sum
    is larger); past that the float64 sum is returned, never a wrapped
    negative value. Float counts are summed in float64.
    """
    def total(dtype=None):
        return sum_cells(t, dims, dtype=dtype, dense=True, keep_attrs=False)

    if t.dtype.kind not in "iu":
        return total()
    approx = total(np.float64)
    if approx.size and float(approx.max()) >= 2.0**62:
        return approx
    return total()


def count_total(t) -> xr.DataArray:
    """Total count (or weight) over ``actual`` and ``predicted``, without int64 overflow.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> int(count_total(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])))
    12
    """
    return _count_sum(validate_tensor(t), (ACTUAL, PREDICTED)).rename("n")


def support(t: xr.DataArray) -> xr.DataArray:
    """Per-class count of actual samples (row sums), dims ``(..., "class")``.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> support(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])).values.tolist()
    [8, 4]
    """
    t = validate_tensor(t)
    out = _count_sum(t, PREDICTED).rename({ACTUAL: CLASS}).rename("support")
    return out.drop_attrs() if hasattr(out, "drop_attrs") else out


def predicted_count(t: xr.DataArray) -> xr.DataArray:
    """Per-class count of predictions (column sums), dims ``(..., "class")``.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> predicted_count(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])).values.tolist()
    [7, 5]
    """
    t = validate_tensor(t)
    out = _count_sum(t, ACTUAL).rename({PREDICTED: CLASS}).rename("predicted")
    return out.drop_attrs() if hasattr(out, "drop_attrs") else out


def top_confusion(t: xr.DataArray) -> xr.Dataset:
    """The most frequent wrong prediction of each actual class.

    Returns
    -------
    xarray.Dataset
        ``top_confusion`` (the predicted class label; missing where a class
        has no errors) and ``top_confusion_count`` (0 where a class has no
        errors), dims ``(..., "class")``.
        Ties go to the class that comes first.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[4, 1, 0], [0, 3, 1], [0, 0, 5]], ["a", "b", "c"])
    >>> top = top_confusion(t)
    >>> top.top_confusion.values[:2].tolist(), top.top_confusion_count.values.tolist()
    (['b', 'c'], [1, 1, 0])
    """
    s = Sums.of(t)
    index, count = top_off_diagonal(s.tensor)
    labels = np.asarray(s.tensor.coords[PREDICTED].values, dtype=object)
    label = np.where(count > 0, labels[index], None)
    return xr.Dataset(
        {
            "top_confusion": _wrap(s, label, "top_confusion", per_class=True),
            "top_confusion_count": _wrap(s, count, "top_confusion_count", per_class=True),
        }
    )


#: The pooled summary figures of a confusion tensor with the function of each, as
#: recomputed by the shift analysis; the same as the pooled multiclass entries of
#: :data:`foldcorr.figures.FIGURES` that are metrics of their own (a test checks it).
SUMMARY_FIGURES = {
    "rk": rk,
    "accuracy": accuracy,
    "balanced_accuracy": balanced_accuracy,
    "kappa": cohen_kappa,
    "macro_f1": macro_f1,
    "macro_mcc": macro_mcc,
}

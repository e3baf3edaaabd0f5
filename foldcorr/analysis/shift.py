r"""Figures at a deployment prevalence, under the label-shift assumption.

Under label shift the class-conditional behaviour of the classifier,
:math:`P(\text{predicted} = j \mid \text{actual} = i)`, is the same in
deployment as in evaluation; only the class prevalence changes. Rescaling row
:math:`i` of the confusion matrix to a target prevalence :math:`\pi_i` then
gives the matrix expected in deployment, and every figure can be recomputed
from it. Nothing here reads files or prints.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import xarray as xr

from foldcorr import metrics as m
from foldcorr.errors import InvalidInputError, UndefinedMetricWarning, check_choice
from foldcorr.tensor import (ACTUAL, CLASS, PREDICTED, cell_sums, is_sparse, nonzero_cells, pool,
                             validate_tensor)

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

__all__ = ["shift_prevalence", "target_prevalence", "ShiftResult", "shifted_figures"]

#: Tolerance on the sum of a target prevalence.
SUM_TOLERANCE = 1e-6


def target_prevalence(t: xr.DataArray,
                      prevalence: str | Mapping[Any, float] | ArrayLike) -> xr.DataArray:
    """Normalise a target prevalence against the classes of a tensor.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor whose class coordinate the target refers to.
    prevalence : "uniform", mapping of class to float, or array_like
        ``"uniform"`` gives 1/K' to each of the K' classes with samples in
        ``t`` (summed over every leading dim) and 0 to a class that occurs
        only in predictions; a mapping names classes (by label, or by the
        label's text, so ``{"3": 0.5}`` finds class ``3``); classes it leaves
        out get 0; an array gives one value per class in tensor order.

    Returns
    -------
    xarray.DataArray
        Dim ``class``, float64, summing to 1.

    Raises
    ------
    InvalidInputError
        On an unknown class name, a negative or non-finite value, a sum other
        than 1 (tolerance 1e-6), an array of the wrong length, or
        ``"uniform"`` on a tensor with no samples.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[8, 2], [1, 9]], ["cod", "hake"])
    >>> target_prevalence(t, {"cod": 0.9, "hake": 0.1}).values.tolist()
    [0.9, 0.1]
    >>> target_prevalence(t, "uniform").values.tolist()
    [0.5, 0.5]
    >>> only_predicted = confusion_tensor([[8, 1, 1], [2, 7, 1], [0, 0, 0]], ["cod", "hake", "ling"])
    >>> target_prevalence(only_predicted, "uniform").values.tolist()
    [0.5, 0.5, 0.0]
    """
    t = validate_tensor(t)
    classes = t.coords[ACTUAL].values.tolist()
    k = len(classes)
    if isinstance(prevalence, str):
        if prevalence != "uniform":
            raise InvalidInputError(
                f"`prevalence` must be 'uniform', a mapping of class to share, or one share "
                f"per class; got {prevalence!r}")
        support = _support(t) > 0
        if not support.any():
            raise InvalidInputError(
                "`prevalence` 'uniform' spreads over the classes with samples, and this "
                f"tensor has none (classes {classes!r})")
        values = np.where(support, 1.0 / int(support.sum()), 0.0)
    elif isinstance(prevalence, Mapping):
        by_text = {str(c): i for i, c in enumerate(classes)}
        values = np.zeros(k)
        for name, share in prevalence.items():
            i = classes.index(name) if name in classes else by_text.get(str(name))
            if i is None:
                shown = ", ".join(repr(c) for c in classes[:10]) + (", ..." if k > 10 else "")
                raise InvalidInputError(
                    f"`prevalence` names the class {name!r}, which is not among the classes "
                    f"[{shown}]")
            values[i] = _share(name, share)
    else:
        values = np.asarray(prevalence, dtype=np.float64).ravel()
        if values.size != k:
            raise InvalidInputError(
                f"`prevalence` has {values.size} values for {k} classes {classes!r}")
        for c, v in zip(classes, values):
            _share(c, v)
    total = float(values.sum())
    if abs(total - 1.0) > SUM_TOLERANCE:
        raise InvalidInputError(
            f"`prevalence` must sum to 1; got {total!r} over "
            f"{list(zip(classes, values.tolist()))!r}")
    return xr.DataArray(values / total, dims=CLASS, coords={CLASS: classes}, name="prevalence")


def _support(t: xr.DataArray) -> np.ndarray:
    """Samples of each actual class, summed over every leading dim (tensor order)."""
    return cell_sums(t)[1].reshape(-1, t.sizes[ACTUAL]).sum(axis=0)


def _scale_rows(t: xr.DataArray, scale: np.ndarray) -> xr.DataArray:
    """The tensor in float64 with row (..., i) multiplied by ``scale[..., i]``, same backing."""
    if not is_sparse(t):
        return t.copy(data=t.values.astype(np.float64) * scale[..., None])
    import sparse

    lead, actual, _, count = nonzero_cells(t)
    factor = scale.reshape(-1, t.sizes[ACTUAL])[lead, actual]
    data = t.data
    keep = data.data != 0
    return t.copy(data=sparse.COO(data.coords[:, keep], count * factor, shape=data.shape,
                                  has_duplicates=False, sorted=True))


def _share(name, value) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InvalidInputError(
            f"`prevalence` of class {name!r} must be a number; got {value!r}") from None
    if not math.isfinite(v) or v < 0:
        raise InvalidInputError(
            f"`prevalence` of class {name!r} must be a finite share >= 0; got {value!r}")
    return v


def shift_prevalence(t: xr.DataArray,
                     prevalence: str | Mapping[Any, float] | ArrayLike) -> xr.DataArray:
    r"""Reweight the rows of a confusion tensor to a target class prevalence.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor, dims ``(..., "actual", "predicted")``; every leading
        slice (e.g. each fold) is reweighted on its own.
    prevalence : "uniform", mapping or array_like
        Target prevalence (see :func:`target_prevalence`).

    Returns
    -------
    xarray.DataArray
        Float64 tensor with the same total per slice and row sums
        :math:`\pi_i s`.

    Raises
    ------
    InvalidInputError
        On a bad target, or when a class with a positive target share has no
        samples in a slice (its row cannot be rescaled): none at all (it
        occurs only in predictions), or none in one leading slice.

    Notes
    -----
    With :math:`s` the slice total and :math:`t_i` the row sums,

    .. math:: C'_{ij} = C_{ij}\, \frac{\pi_i\, s}{t_i}

    This keeps every row's distribution over predictions, the label-shift
    assumption [1]_: the classifier behaves on each class as it did in
    evaluation. It does not hold when the classes themselves change (new
    sub-populations, a different instrument or season), only their mix.

    References
    ----------
    .. [1] M. Saerens, P. Latinne, C. Decaestecker, "Adjusting the outputs of a
       classifier to new a priori probabilities: a simple procedure",
       Neural Computation 14 (2002) 21-41.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[8, 2], [1, 9]], ["cod", "hake"])
    >>> shift_prevalence(t, {"cod": 0.75, "hake": 0.25}).values.tolist()
    [[12.0, 3.0], [0.5, 4.5]]
    """
    t = validate_tensor(t)
    pi = target_prevalence(t, prevalence).values
    rows = cell_sums(t)[1]
    total = rows.sum(axis=-1, keepdims=True)
    missing = (rows == 0) & (pi > 0)
    if missing.any():
        index = np.argwhere(missing)[0]
        cls = t.coords[ACTUAL].values.tolist()[index[-1]]
        share = float(pi[index[-1]])
        if _support(t)[index[-1]] == 0:
            raise InvalidInputError(
                f"class {cls!r} has no samples (it occurs only in predictions), so it cannot "
                f"be rescaled to the target share {share!r}; give it share 0")
        lead = [d for d in t.dims if d not in (ACTUAL, PREDICTED)]
        where = "".join(f" in {d}={t.coords[d].values.tolist()[i]!r}" if d in t.coords
                        else f" in {d} {i}"
                        for d, i in zip(lead, index[:-1]))
        raise InvalidInputError(
            f"class {cls!r} has no samples{where}, so it cannot be rescaled to the target "
            f"share {share!r}; give it share 0 or pool the folds first")
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = np.where(rows > 0, pi * total / np.where(rows > 0, rows, 1.0), 0.0)
    out = _scale_rows(t, scale)
    out.attrs["prevalence_shift"] = ",".join(f"{c}={p:.6g}" for c, p in
                                             zip(t.coords[ACTUAL].values.tolist(), pi))
    return out


#: Pooled figures recomputed at the target: the same as a score report's.
SHIFTED_FIGURES = m.SUMMARY_FIGURES


@dataclass(frozen=True)
class ShiftResult:
    """Figures at a target prevalence, beside the observed prevalence.

    Attributes
    ----------
    prevalence : xarray.DataArray
        Target prevalence, dim ``class``.
    observed : xarray.DataArray
        Observed prevalence (pooled over folds), dim ``class``.
    tensor : xarray.DataArray
        The pooled tensor reweighted to the target (float64).
    pooled : xarray.Dataset
        Scalars ``rk``, ``accuracy``, ``balanced_accuracy``, ``kappa``,
        ``macro_f1`` and ``macro_mcc`` at the target.
    per_class : xarray.Dataset
        Dim ``class``: ``mcc``, ``recall``, ``precision`` and ``f1`` at the
        target. Recall is unchanged for a class with a positive target
        share; a class with share 0 has no samples at the target, so its
        recall is 0/0 (``undefined``, with a warning).
    warnings : tuple of str
        Undefined values at the target, prefixed ``at target prevalence``.
    """

    prevalence: xr.DataArray
    observed: xr.DataArray
    tensor: xr.DataArray
    pooled: xr.Dataset
    per_class: xr.Dataset
    warnings: tuple[str, ...]

    @property
    def rk(self) -> float:
        """R_K at the target prevalence."""
        return float(self.pooled["rk"])


def shifted_figures(t: xr.DataArray, prevalence: str | Mapping[Any, float] | ArrayLike, *,
                    undefined: str = "zero") -> ShiftResult:
    """Recompute the pooled and per-class figures at a target prevalence.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor, dims ``([fold,] actual, predicted)``.
    prevalence : "uniform", mapping or array_like
        Target prevalence (see :func:`target_prevalence`).
    undefined : {"zero", "nan"}, default "zero"
        Convention for undefined values.

    Returns
    -------
    ShiftResult

    Raises
    ------
    InvalidInputError
        As :func:`shift_prevalence`.

    Notes
    -----
    The reweighting keeps the backing: a sparse tensor is scaled at its
    nonzero cells, O(nonzero cells + K). Folds are pooled before the reweighting, so a class missing from one
    fold does not block the shift; per-fold figures are not recomputed.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[80, 20], [1, 9]], ["cod", "hake"])
    >>> r = shifted_figures(t, "uniform")
    >>> round(r.rk, 4), r.observed.round(3).values.tolist()
    (0.7035, [0.909, 0.091])
    """
    check_choice("undefined", undefined, m.UNDEFINED_CHOICES)
    t = validate_tensor(t)
    pooled_t = pool(t)
    rows = xr.DataArray(cell_sums(pooled_t)[1], dims=CLASS,
                        coords={CLASS: pooled_t.coords[ACTUAL].values})
    observed = (rows / float(rows.sum())).rename("observed_prevalence")
    shifted = shift_prevalence(pooled_t, prevalence)
    notes: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UndefinedMetricWarning)
        pooled = xr.Dataset({k: fn(shifted, undefined=undefined)
                             for k, fn in SHIFTED_FIGURES.items()})
        per_class = xr.Dataset({
            "mcc": m.ovr_mcc(shifted, undefined=undefined),
            "recall": m.recall(shifted, undefined=undefined),
            "precision": m.precision(shifted, undefined=undefined),
            "f1": m.f1(shifted, undefined=undefined),
        })
    for w in caught:
        if issubclass(w.category, UndefinedMetricWarning):
            notes.append(f"at target prevalence: {w.message}")
    return ShiftResult(
        prevalence=target_prevalence(pooled_t, prevalence),
        observed=observed,
        tensor=shifted,
        pooled=pooled,
        per_class=per_class,
        warnings=tuple(dict.fromkeys(notes)),
    )

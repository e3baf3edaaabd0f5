"""Tensor dims and validation: what a confusion tensor is.

A confusion tensor is an :class:`xarray.DataArray` named ``count`` with dims
``(..., "actual", "predicted")``. Both class dims carry the same ordered class
coordinate; leading dims (``fold``, ``split``, ``model``, ``label``) are free.
Counts are int64, or float64 when sample weights are given. This module names
the dims, wraps and validates tensors and pools them; nothing here computes a
metric.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
import xarray as xr

from foldcorr.errors import InvalidTensorError
from foldcorr.tensor.backing import is_sparse, sum_cells

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

__all__ = [
    "ACTUAL",
    "PREDICTED",
    "FOLD",
    "CLASS",
    "LABEL",
    "COUNT",
    "class_dims",
    "confusion_tensor",
    "validate_tensor",
    "pool",
    "py_value",
]

ACTUAL = "actual"
PREDICTED = "predicted"
FOLD = "fold"
CLASS = "class"
LABEL = "label"
COUNT = "count"

def class_dims() -> tuple[str, str]:
    """The two class dims, in the order every tensor keeps them.

    Examples
    --------
    >>> class_dims()
    ('actual', 'predicted')
    """
    return (ACTUAL, PREDICTED)


def confusion_tensor(
    counts: ArrayLike, classes: ArrayLike, *, leading: Mapping[str, Sequence] | None = None,
    attrs: Mapping[str, Any] | None = None
) -> xr.DataArray:
    """Wrap a numeric array of counts as a labelled confusion tensor.

    Parameters
    ----------
    counts : array_like or sparse.COO, shape (..., K, K)
        Counts with rows actual and columns predicted; a ``sparse.COO``
        array stays sparse (see :mod:`foldcorr.tensor.backing`).
    classes : sequence
        The K class labels, in order.
    leading : mapping of str to sequence, optional
        Names and coordinates of the leading dims, in order.
    attrs : dict, optional
        Provenance kept on the result.

    Returns
    -------
    xarray.DataArray
        The validated tensor named ``count``.

    Examples
    --------
    >>> t = confusion_tensor([[5, 1], [2, 7]], ["cat", "dog"])
    >>> t.dims, t.coords["actual"].values.tolist()
    (('actual', 'predicted'), ['cat', 'dog'])
    """
    leading = dict(leading or {})
    classes = list(classes)
    dims = (*leading, ACTUAL, PREDICTED)
    coords = {**leading, ACTUAL: classes, PREDICTED: classes}
    counts = counts if is_sparse(counts) else np.asarray(counts)
    t = xr.DataArray(counts, dims=dims, coords=coords, name=COUNT)
    t.attrs.update(attrs or {})
    return validate_tensor(t)


def validate_tensor(t: xr.DataArray) -> xr.DataArray:
    """Check a confusion tensor and return it in normal form.

    Normal form: dims ``(..., "actual", "predicted")`` in that order, the same
    class coordinate on both class dims, finite non-negative counts of dtype
    int64 or float64, and the name ``count``. The cells may be a dense numpy
    array or a ``sparse.COO`` array (fill value 0); the backing is kept.

    Parameters
    ----------
    t : xarray.DataArray
        Candidate tensor.

    Returns
    -------
    xarray.DataArray
        The normalised tensor: a new object, which may share its counts
        with the input (neither is changed).

    Raises
    ------
    InvalidTensorError
        When ``t`` is not a DataArray, lacks a class dim, has no class
        (K = 0), the class coordinates differ, or a count is negative, NaN or
        infinite.

    Examples
    --------
    >>> import xarray as xr
    >>> t = xr.DataArray([[3, 1], [0, 4]], dims=("actual", "predicted"))
    >>> validate_tensor(t).coords["predicted"].values.tolist()
    [0, 1]
    >>> validate_tensor(t - 1)
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidTensorError: counts must be non-negative; found -1 at actual=1, predicted=0
    """
    if not isinstance(t, xr.DataArray):
        raise InvalidTensorError(
            f"a confusion tensor must be an xarray.DataArray; got {type(t).__name__!r}"
        )
    missing = [d for d in (ACTUAL, PREDICTED) if d not in t.dims]
    if missing:
        raise InvalidTensorError(
            f"a confusion tensor needs dims 'actual' and 'predicted'; "
            f"missing {missing!r} in dims {t.dims!r}"
        )
    lead = [d for d in t.dims if d not in (ACTUAL, PREDICTED)]
    if t.dims != (*lead, ACTUAL, PREDICTED):
        t = t.transpose(*lead, ACTUAL, PREDICTED)
    k = t.sizes[ACTUAL]
    if t.sizes[PREDICTED] != k:
        raise InvalidTensorError(
            f"a confusion tensor must be square; got {k} actual by "
            f"{t.sizes[PREDICTED]} predicted classes"
        )
    if k == 0:
        raise InvalidTensorError(
            "a confusion tensor needs at least one class; got 0 actual by 0 predicted classes "
            "(no labels were counted)"
        )
    t = _with_class_coords(t)
    values = _normal_counts(t)
    # A new object sharing the counts (no copy of a possibly large array).
    return xr.DataArray(values, coords=t.coords, dims=t.dims, name=COUNT, attrs=dict(t.attrs))


def _normal_counts(t: xr.DataArray):
    """The cells as int64 or float64 (dense, or sparse COO), checked finite and non-negative."""
    values = t.data
    stored = values
    if is_sparse(values):
        values = values if type(values).__name__ == "COO" else values.asformat("coo")
        if values.fill_value != 0:
            raise InvalidTensorError(
                f"sparse counts must have fill value 0; got {py_value(values.fill_value)!r}")
        stored = values.data
    else:
        values = stored = np.asarray(values)
    dtype = stored.dtype
    if not (np.issubdtype(dtype, np.number) or dtype == bool):
        raise InvalidTensorError(f"counts must be numeric; got dtype {dtype!r}")
    kind = np.float64 if np.issubdtype(dtype, np.floating) else np.int64
    if dtype != kind:
        values = values.astype(kind)
        stored = values.data if is_sparse(values) else values
    if kind is np.float64:
        bad = ~np.isfinite(stored)
        if bad.any():
            raise InvalidTensorError(
                f"counts must be finite; found {py_value(stored[bad][0])!r} at "
                f"{_where(t, values, bad)}")
    neg = stored < 0
    if neg.any():
        raise InvalidTensorError(
            f"counts must be non-negative; found {py_value(stored[neg][0])!r} at "
            f"{_where(t, values, neg)}")
    return values


def _with_class_coords(t: xr.DataArray) -> xr.DataArray:
    has_a, has_p = ACTUAL in t.coords, PREDICTED in t.coords
    if not has_a and not has_p:
        k = t.sizes[ACTUAL]
        return t.assign_coords({ACTUAL: np.arange(k), PREDICTED: np.arange(k)})
    if has_a != has_p:
        named = ACTUAL if has_a else PREDICTED
        other = PREDICTED if has_a else ACTUAL
        return t.assign_coords({other: t.coords[named].values})
    a, p = t.coords[ACTUAL].values, t.coords[PREDICTED].values
    if not np.array_equal(a, p):
        raise InvalidTensorError(
            "the 'actual' and 'predicted' class coordinates must be the same, in the "
            f"same order; got {a.tolist()!r} and {p.tolist()!r}"
        )
    return t


def _where(t: xr.DataArray, values, mask: np.ndarray) -> str:
    first = np.flatnonzero(mask)[0]
    index = (values.coords[:, first] if is_sparse(values)
             else np.unravel_index(first, mask.shape))
    return ", ".join(
        f"{dim}={py_value(t.coords[dim].values[i])!r}" if dim in t.coords else f"{dim}={i}"
        for dim, i in zip(t.dims, index)
    )


def pool(t: xr.DataArray, dim: str | Sequence[str] = FOLD) -> xr.DataArray:
    """Sum a tensor over one or more leading dims, where present.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor.
    dim : str or sequence of str, default "fold"
        Dims to pool; names that are absent are ignored.

    Returns
    -------
    xarray.DataArray
        The pooled tensor, attrs kept, with the backing of ``t`` (dense or sparse).

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> t = tally([0, 1, 1, 0], [0, 1, 0, 0], folds=[1, 1, 2, 2])
    >>> pool(t).values.tolist()
    [[2, 0], [1, 1]]
    """
    dims = [dim] if isinstance(dim, str) else list(dim)
    present = [d for d in dims if d in t.dims]
    if not present:
        return t
    return sum_cells(t, present)


def py_value(value):
    """A numpy scalar as the plain Python value it holds; anything else unchanged.

    Examples
    --------
    >>> import numpy as np
    >>> py_value(np.int64(3)), py_value("a")
    (3, 'a')
    """
    return value.item() if isinstance(value, np.generic) else value

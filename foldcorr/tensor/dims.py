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

import numpy as np
import xarray as xr

from foldcorr.errors import InvalidTensorError

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
    counts, classes, *, leading: Mapping[str, Sequence] | None = None, attrs=None
) -> xr.DataArray:
    """Wrap a numeric array of counts as a labelled confusion tensor.

    Parameters
    ----------
    counts : array_like, shape (..., K, K)
        Counts with rows actual and columns predicted.
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
    t = xr.DataArray(np.asarray(counts), dims=dims, coords=coords, name=COUNT)
    t.attrs.update(attrs or {})
    return validate_tensor(t)


def validate_tensor(t) -> xr.DataArray:
    """Check a confusion tensor and return it in normal form.

    Normal form: dims ``(..., "actual", "predicted")`` in that order, the same
    class coordinate on both class dims, finite non-negative counts of dtype
    int64 or float64, and the name ``count``.

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
    values = np.asarray(t.values)
    if not (np.issubdtype(values.dtype, np.number) or values.dtype == bool):
        raise InvalidTensorError(f"counts must be numeric; got dtype {values.dtype!r}")
    if np.issubdtype(values.dtype, np.floating):
        values = values.astype(np.float64, copy=False)
        bad = ~np.isfinite(values)
        if bad.any():
            raise InvalidTensorError(
                f"counts must be finite; found {py_value(values[bad][0])!r} at {_where(t, bad)}"
            )
    else:
        values = values.astype(np.int64, copy=False)
    neg = values < 0
    if neg.any():
        raise InvalidTensorError(
            f"counts must be non-negative; found {py_value(values[neg][0])!r} at {_where(t, neg)}"
        )
    # A new object sharing the counts (no copy of a possibly large array).
    return xr.DataArray(values, coords=t.coords, dims=t.dims, name=COUNT, attrs=dict(t.attrs))


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


def _where(t: xr.DataArray, mask: np.ndarray) -> str:
    index = np.argwhere(mask)[0]
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
        The pooled tensor, attrs kept.

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
    return t.sum(present, keep_attrs=True)


def py_value(value):
    """A numpy scalar as the plain Python value it holds; anything else unchanged.

    Examples
    --------
    >>> import numpy as np
    >>> py_value(np.int64(3)), py_value("a")
    (3, 'a')
    """
    return value.item() if isinstance(value, np.generic) else value

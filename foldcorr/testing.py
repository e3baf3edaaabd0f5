"""Helpers for tests that compare confusion tensors (used by foldcorr's own suite)."""

from __future__ import annotations

import numpy as np

from foldcorr.tensor import ACTUAL, validate_tensor

__all__ = ["assert_tensor_equal", "expand_counts"]


def assert_tensor_equal(actual, expected, *, check_attrs: bool = False) -> None:
    """Assert two confusion tensors have the same dims, coordinates and counts.

    Parameters
    ----------
    actual, expected : xarray.DataArray
        Tensors to compare (validated first).
    check_attrs : bool, default False
        Also compare ``attrs``.

    Raises
    ------
    AssertionError
        Naming the first difference.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> assert_tensor_equal(tally([1, 2], [1, 1]), tally([1, 2], [1, 1]))
    """
    a, e = validate_tensor(actual), validate_tensor(expected)
    assert a.dims == e.dims, f"dims differ: {a.dims!r} != {e.dims!r}"
    for dim in a.dims:
        av, ev = a.coords[dim].values.tolist(), e.coords[dim].values.tolist()
        assert av == ev, f"coordinate {dim!r} differs: {av!r} != {ev!r}"
    assert a.dtype == e.dtype, f"dtypes differ: {a.dtype} != {e.dtype}"
    np.testing.assert_array_equal(a.values, e.values)
    if check_attrs:
        assert a.attrs == e.attrs, f"attrs differ: {a.attrs!r} != {e.attrs!r}"


def expand_counts(matrix):
    """Per-sample label arrays whose confusion matrix is ``matrix``.

    Parameters
    ----------
    matrix : array_like or xarray.DataArray, shape (K, K)
        Integer counts; for a DataArray the class coordinate gives the labels.

    Returns
    -------
    truth, pred : numpy.ndarray
        Labels (class labels for a DataArray, else integer codes).

    Examples
    --------
    >>> truth, pred = expand_counts([[2, 1], [0, 1]])
    >>> truth.tolist(), pred.tolist()
    ([0, 0, 0, 1], [0, 0, 1, 1])
    """
    labels = None
    if hasattr(matrix, "dims"):
        labels = np.asarray(matrix.coords[ACTUAL].values)
        matrix = matrix.values
    counts = np.asarray(matrix, dtype=np.int64)
    k = counts.shape[0]
    truth = np.repeat(np.repeat(np.arange(k), k), counts.ravel())
    pred = np.repeat(np.tile(np.arange(k), k), counts.ravel())
    if labels is not None:
        return labels[truth], labels[pred]
    return truth, pred

"""Cell backings of a confusion tensor: dense numpy or sparse COO, and the sums over cells.

A confusion tensor is always an :class:`xarray.DataArray` named ``count``; its
cells are held either by a dense :class:`numpy.ndarray` (few classes) or by a
``sparse.COO`` array of the ``sparse`` package (many classes: only the
nonzero cells are stored). Counting from labels picks the backing by the size
of the dense array (:data:`DENSE_CELL_LIMIT`), so K = 20,000 classes cost
memory in proportion to the distinct (actual, predicted) pairs seen, not K^2.

With a sparse backing, ``t.data`` is the ``sparse.COO`` array, ``t.values``
raises (``sparse`` refuses to densify silently) and ``as_dense(t)``, or
``t.copy(data=t.data.todense())``, gives the dense tensor when it fits in
memory. Every figure of :mod:`foldcorr.metrics` is computed from the sums
here (margins, diagonal, largest off-diagonal cells), in O(nonzero cells +
folds x K) for either backing. ``sparse`` (which imports numba) is imported
only when a sparse tensor is made.
"""

from __future__ import annotations

import os

import numpy as np
import xarray as xr

from foldcorr.errors import TensorTooLargeError

__all__ = [
    "DENSE_CELL_LIMIT",
    "is_sparse",
    "as_dense",
    "memory_available",
    "check_dense_size",
    "count_sparse",
    "sum_cells",
    "cell_sums",
    "integer_sums",
    "top_off_diagonal",
    "nonzero_cells",
]

#: Counting from labels keeps a dense array up to this many cells (folds x K x K,
#: 1 GiB of int64: K = 5,000 with 5 folds) and counts only the distinct cells above
#: it. Dense is as fast or faster below it (``docs/many-classes.md``), and plots
#: and saved files take a dense tensor; above it a dense array is what does not fit.
DENSE_CELL_LIMIT = 1 << 27


def is_sparse(t) -> bool:
    """Whether a tensor (or an array) is held by a ``sparse`` package array.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> is_sparse(confusion_tensor([[1, 0], [0, 1]], ["a", "b"]))
    False
    """
    data = t.data if isinstance(t, xr.DataArray) else t
    return type(data).__module__.split(".")[0] == "sparse"


def memory_available() -> int | None:
    """Bytes of memory free for a new array on this machine, or None when unknown.

    Examples
    --------
    >>> memory_available() is None or memory_available() > 0
    True
    """
    try:
        with open("/proc/meminfo") as f:
            for line in f:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    try:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):
        return None


def _size(nbytes: float) -> str:
    for unit in ("B", "KiB", "MiB", "GiB", "TiB", "PiB"):
        if nbytes < 1024 or unit == "PiB":
            return f"{nbytes:.1f} {unit}" if unit != "B" else f"{int(nbytes)} B"
        nbytes /= 1024
    return ""  # unreachable


def check_dense_size(shape, dtype, what: str = "a dense confusion tensor", *,
                     copies: float = 1) -> None:
    """Refuse, before allocating, a dense array larger than the memory free.

    Parameters
    ----------
    shape : sequence of int
        Shape of the array that would be allocated.
    dtype : numpy dtype
        Its element type.
    what : str
        What the array is, for the message.
    copies : float, default 1
        How many arrays of that size the caller will hold at once.

    Raises
    ------
    TensorTooLargeError
        When the array needs more bytes than :func:`memory_available` reports.

    Examples
    --------
    >>> check_dense_size((2, 2), np.int64)
    >>> check_dense_size((10**6, 10**6), np.int64)
    Traceback (most recent call last):
    ...
    foldcorr.errors.TensorTooLargeError: a dense confusion tensor of shape (1000000, 1000000) needs 7.3 TiB...
    """
    nbytes = float(np.prod([float(n) for n in shape])) * np.dtype(dtype).itemsize * copies
    free = memory_available()
    if free is not None and nbytes > free:
        raise TensorTooLargeError(
            f"{what} of shape {tuple(int(n) for n in shape)!r} needs {_size(nbytes)}, more than "
            f"the {_size(free)} of memory free; keep the counts sparse (tally from labels, or "
            "pass a sparse.COO array), or select or pool fewer classes or folds"
        )


def as_dense(t: xr.DataArray, *, copies: float = 1, what: str = "a dense confusion tensor"):
    """The tensor with dense numpy cells (itself when already dense).

    The one place where a sparse tensor is made dense, for analyses that
    still need every cell; refused when ``copies`` dense arrays of its size
    would not fit in the memory free.

    Parameters
    ----------
    t : xarray.DataArray
        A tensor, dense or sparse.
    copies : float, default 1
        Arrays of the tensor's size the caller will hold at once.
    what : str
        What needs the dense cells, for the message.

    Returns
    -------
    xarray.DataArray
        ``t`` itself when dense, else a dense copy.

    Raises
    ------
    TensorTooLargeError
        When the dense cells need more memory than is free.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[1, 0], [2, 1]], ["a", "b"])
    >>> as_dense(t) is t
    True
    """
    if not is_sparse(t):
        return t
    check_dense_size(t.shape, t.dtype, what, copies=copies)
    return t.copy(data=t.data.todense())


def _mixed_radix(codes, shape) -> np.ndarray:
    index = np.zeros(len(codes[0]), dtype=np.int64)
    for c, size in zip(codes, shape):
        index *= size
        index += c
    return index


def count_sparse(codes, shape, *, weights=None):
    """Count rows of integer codes into a ``sparse.COO`` array, touching only the cells seen.

    The sparse counterpart of :func:`foldcorr.tensor.count_codes`: the cell of
    each row is one int64 code, the distinct codes are counted with
    ``numpy.unique`` (O(rows log rows)); no array of size ``shape`` is made.

    Parameters
    ----------
    codes : sequence of numpy.ndarray
        One integer array per dim, ``0 <= codes[d] < shape[d]``.
    shape : sequence of int
        Size of each dim; their product must stay below 2**63.
    weights : numpy.ndarray, optional
        One float weight per row; the counts become float64 sums.

    Returns
    -------
    sparse.COO
        int64 counts (float64 with weights) in canonical (sorted) order.

    Examples
    --------
    >>> c = count_sparse([np.array([0, 1, 1]), np.array([1, 1, 1])], [2, 2])
    >>> c.nnz, c.todense().tolist()
    (2, [[0, 1], [0, 2]])
    """
    import sparse

    index = _mixed_radix(codes, shape)
    if weights is None:
        cells, counts = np.unique(index, return_counts=True)
        counts = counts.astype(np.int64, copy=False)
    else:
        cells, inverse = np.unique(index, return_inverse=True)
        counts = np.bincount(inverse.reshape(-1), weights=weights, minlength=len(cells))
    coords = np.stack(np.unravel_index(cells, tuple(shape))) if len(shape) else cells[None]
    return sparse.COO(coords, counts, shape=tuple(shape), has_duplicates=False, sorted=True)


def sum_cells(t: xr.DataArray, dims, *, dtype=None, dense: bool = False,
              keep_attrs: bool = True) -> xr.DataArray:
    """Sum a tensor's cells over ``dims``, keeping its backing (or making the result dense).

    A sparse sum groups the stored cells by the dims kept (one stable sort,
    exact in int64); it does not go through the JIT-compiled reductions of
    ``sparse``, whose first call costs seconds.

    Parameters
    ----------
    t : xarray.DataArray
        A tensor or any DataArray with dense or sparse cells.
    dims : str or sequence of str
        Dims to sum over.
    dtype : numpy dtype, optional
        Type of the sums (default: that of the cells).
    dense : bool, default False
        Return dense numpy sums (for results as small as the margins).
    keep_attrs : bool, default True
        Keep the attrs of ``t``.

    Returns
    -------
    xarray.DataArray
        Without ``dims``.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> t = tally([0, 1, 1, 0], [0, 1, 0, 0], folds=[1, 1, 2, 2])
    >>> sum_cells(t, ["fold"]).values.tolist()
    [[2, 0], [1, 1]]
    """
    dims = [dims] if isinstance(dims, str) else list(dims)
    axes = tuple(t.get_axis_num(d) for d in dims)
    keep = [d for d in t.dims if d not in dims]
    data = t.data
    if is_sparse(data):
        data = _sparse_sum(data, axes, dtype)
        data = data.todense() if dense and is_sparse(data) else data
    else:
        data = data.sum(axis=axes, dtype=dtype)
    coords = {name: c for name, c in t.coords.items() if not set(c.dims) & set(dims)}
    return xr.DataArray(data, dims=keep, coords=coords, name=t.name,
                        attrs=dict(t.attrs) if keep_attrs else None)


def _sparse_sum(data, axes, dtype):
    import sparse

    values = data.data.astype(dtype or data.dtype, copy=False)
    kept = [i for i in range(data.ndim) if i not in axes]
    if not kept:
        return np.asarray(values.sum())
    shape = tuple(data.shape[i] for i in kept)
    keys = np.ravel_multi_index(tuple(data.coords[kept]), shape)
    order = np.argsort(keys, kind="stable")
    keys = keys[order]
    starts = np.flatnonzero(np.r_[True, keys[1:] != keys[:-1]]) if keys.size else keys
    sums = np.add.reduceat(values[order], starts) if keys.size else values
    coords = np.stack(np.unravel_index(keys[starts], shape))
    return sparse.COO(coords, sums, shape=shape, has_duplicates=False, sorted=True)


def _row_keys(data):
    """Flat (leading..., actual) and (leading..., predicted) index of each stored cell."""
    *lead, k, _ = data.shape
    lead_index = (np.ravel_multi_index(tuple(data.coords[:-2]), lead) if lead
                  else np.zeros(data.nnz, dtype=np.intp))
    a, p = data.coords[-2], data.coords[-1]
    return lead_index * k + a, lead_index * k + p, int(np.prod(lead, dtype=np.int64)) * k


def cell_sums(t: xr.DataArray):
    """Diagonal, row sums and column sums of a tensor in float64, for either backing.

    Parameters
    ----------
    t : xarray.DataArray
        A tensor in normal form (dims ``(..., "actual", "predicted")``).

    Returns
    -------
    diag, actual, predicted : numpy.ndarray
        Each of shape ``(..., K)``: C_kk, t_k (row sums) and p_k (column sums).
        O(nonzero cells) for a sparse tensor; no float copy of the cells.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> [a.tolist() for a in cell_sums(confusion_tensor([[3, 1], [0, 4]], ["a", "b"]))]
    [[3.0, 4.0], [4.0, 4.0], [3.0, 5.0]]
    """
    data = t.data
    if not is_sparse(data):
        diag = np.diagonal(data, axis1=-2, axis2=-1).astype(np.float64)
        return diag, data.sum(axis=-1, dtype=np.float64), data.sum(axis=-2, dtype=np.float64)
    rows, cols, n = _row_keys(data)
    w = data.data.astype(np.float64, copy=False)
    on = data.coords[-2] == data.coords[-1]
    shape = data.shape[:-1]
    return tuple(np.bincount(keys, weights=v, minlength=n).reshape(shape)
                 for keys, v in ((rows[on], w[on]), (rows, w), (cols, w)))


def integer_sums(t: xr.DataArray):
    """Trace, total, row sums and column sums as exact Python integers, or None.

    None unless the counts are integers. Each sum is an object array of
    Python ints (trace and total over the leading dims, the margins with the
    class axis last), so products of sums are exact at any size.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> [a.tolist() for a in integer_sums(confusion_tensor([[3, 1], [0, 4]], ["a", "b"]))]
    [7, 8, [4, 4], [3, 5]]
    >>> integer_sums(confusion_tensor([[0.5, 1.0], [0.0, 4.0]], ["a", "b"])) is None
    True
    """
    data = t.data
    values = data.data if is_sparse(data) else data
    if values.dtype.kind not in "iu":
        return None
    if is_sparse(data):
        rows, cols, n = _row_keys(data)
        on = data.coords[-2] == data.coords[-1]
        cells = values.astype(object)
        sums = []
        for keys, v in ((rows[on], cells[on]), (rows, cells), (cols, cells)):
            out = np.zeros(n, dtype=object)
            np.add.at(out, keys, v)
            sums.append(out.reshape(data.shape[:-1]))
        diag, actual, predicted = sums
    else:  # int64 sums where no total can overflow them, Python ints beyond
        cells = data if float(data.sum(dtype=np.float64)) < 2.0**62 else data.astype(object)
        diag = np.diagonal(cells, axis1=-2, axis2=-1).astype(object)
        actual, predicted = cells.sum(axis=-1).astype(object), cells.sum(axis=-2).astype(object)
    whole = (np.asarray(diag.sum(axis=-1), dtype=object), np.asarray(actual.sum(axis=-1), dtype=object))
    return (*whole, actual, predicted)


def top_off_diagonal(t: xr.DataArray):
    """The largest off-diagonal cell of each row: its column and its count.

    Ties go to the column that comes first; a row without an off-diagonal
    count has column 0 and count 0.

    Returns
    -------
    index, count : numpy.ndarray
        Shape ``(..., K)``; ``count`` has the tensor's dtype.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[4, 1, 1], [0, 3, 0], [0, 2, 5]], ["a", "b", "c"])
    >>> [a.tolist() for a in top_off_diagonal(t)]
    [[1, 0, 1], [1, 0, 2]]
    """
    data = t.data
    k = data.shape[-1]
    if not is_sparse(data):
        off = np.where(np.eye(k, dtype=bool), -1, data) if k > 1 else np.zeros_like(data)
        index = off.argmax(axis=-1)
        count = np.take_along_axis(off, index[..., None], axis=-1)[..., 0]
        return np.where(count > 0, index, 0), np.maximum(count, 0).astype(data.dtype)
    rows, _, n = _row_keys(data)
    p = data.coords[-1]
    off = data.coords[-2] != p
    rows, p, vals = rows[off], p[off], data.data[off]
    order = np.lexsort((p, -vals, rows))
    first = order[np.r_[True, rows[order][1:] != rows[order][:-1]]] if order.size else order
    index = np.zeros(n, dtype=np.intp)
    count = np.zeros(n, dtype=data.dtype)
    index[rows[first]] = p[first]
    count[rows[first]] = vals[first]
    index[count <= 0] = 0
    return index.reshape(data.shape[:-1]), count.reshape(data.shape[:-1])


def nonzero_cells(t: xr.DataArray):
    """The nonzero cells of a tensor, in C order, for either backing.

    Parameters
    ----------
    t : xarray.DataArray
        A tensor in normal form (dims ``(..., "actual", "predicted")``).

    Returns
    -------
    lead, actual, predicted, count : numpy.ndarray
        One entry per nonzero cell: the flat index of its slice over the
        leading dims (0 without leading dims), its row and column, and its
        count (the tensor's dtype). O(nonzero cells) for a sparse tensor,
        one scan of the cells for a dense one.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> [a.tolist() for a in nonzero_cells(confusion_tensor([[3, 1], [0, 4]], ["a", "b"]))]
    [[0, 0, 0], [0, 0, 1], [0, 1, 1], [3, 1, 4]]
    """
    data = t.data
    if is_sparse(data):
        rows, _, _ = _row_keys(data)
        k = data.shape[-1]
        keep = data.data != 0
        return rows[keep] // k, data.coords[-2][keep], data.coords[-1][keep], data.data[keep]
    k = data.shape[-1]
    flat = np.asarray(data).reshape(-1, k, k)
    lead, actual, predicted = np.nonzero(flat)
    return lead, actual, predicted, flat[lead, actual, predicted]

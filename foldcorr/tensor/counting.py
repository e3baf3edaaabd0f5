"""Counting labels into tensors: one coding rule for every source, one counting step.

Labels of every column are coded over one class list (small non-negative
integers and categoricals without hashing, anything else by one
factorisation), then counted with one ``numpy.bincount`` (:func:`count_codes`).
The messages for bad labels and weights are shared with the streaming sources,
so both word them the same way. Nothing here computes a metric.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr._version import __version__
from foldcorr.errors import InvalidInputError
from foldcorr.tensor.coding import arrow_text_codes
from foldcorr.tensor.backing import DENSE_CELL_LIMIT, check_dense_size, count_sparse
from foldcorr.tensor.dims import ACTUAL, COUNT, FOLD, PREDICTED, py_value, validate_tensor

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

__all__ = [
    "tally",
    "tally_frame",
    "tally_columns",
    "count_codes",
    "unknown_label_message",
    "missing_label_message",
    "bad_weight_message",
    "fixed_classes",
    "sorted_codes",
]

# Integer labels in [0, _DIRECT_MAX) are used as codes without hashing.
_DIRECT_MAX = 1 << 16


def tally(truth: ArrayLike, pred: ArrayLike, *, folds: ArrayLike | None = None,
          weights: ArrayLike | None = None, classes: ArrayLike | None = None) -> xr.DataArray:
    """Count (actual, predicted) pairs into a confusion tensor.

    Parameters
    ----------
    truth, pred : array_like
        One label per sample: strings, integers, booleans or categoricals.
    folds : array_like, optional
        One fold label per sample; adds a leading dim ``fold``.
    weights : array_like, optional
        Non-negative sample weights; the counts become float64.
    classes : sequence, optional
        The class order. Labels outside it are an error. Without it, the
        classes are every label seen in either array, sorted.

    Returns
    -------
    xarray.DataArray
        Tensor with dims ``([fold,] actual, predicted)``.

    Raises
    ------
    InvalidInputError
        On arrays of different length, missing labels, labels outside
        ``classes``, or negative or non-finite weights.

    Notes
    -----
    All labels are coded in one factorisation of truth and predictions together
    and counted with a single ``numpy.bincount`` over
    ``(fold * K + actual) * K + predicted``. Small non-negative integer labels
    and categoricals skip the hashing step.

    Examples
    --------
    >>> t = tally(["cat", "dog", "dog"], ["cat", "cat", "dog"])
    >>> t.values.tolist()
    [[1, 0], [1, 1]]
    >>> t.coords["actual"].values.tolist()
    ['cat', 'dog']
    """
    columns = {"truth": truth, "pred": pred}
    leading = {} if folds is None else {FOLD: folds}
    return _tally_columns(columns, leading, weights, classes, attrs={})


def tally_frame(
    df: pd.DataFrame,
    *,
    truth: str = ACTUAL,
    pred: str = PREDICTED,
    by: str | Sequence[str] | Mapping[str, str] | None = None,
    weight: str | None = None,
    classes: ArrayLike | None = None,
) -> xr.DataArray:
    """Count a prediction table into a confusion tensor.

    Parameters
    ----------
    df : pandas.DataFrame
        One row per sample.
    truth, pred : str
        Column names of the actual and predicted labels.
    by : str, sequence of str or mapping of dim to column, optional
        Columns that become leading dims (e.g. ``"fold"``); a mapping names
        the dim differently from its column, e.g. ``{"fold": "cv_round"}``.
    weight : str, optional
        Column of sample weights.
    classes : sequence, optional
        Fixed class order (see :func:`tally`).

    Returns
    -------
    xarray.DataArray
        The confusion tensor, with the columns used recorded in ``attrs``.

    Raises
    ------
    InvalidInputError
        When a named column is missing, or as :func:`tally`.

    Examples
    --------
    >>> import pandas as pd
    >>> df = pd.DataFrame({"actual": ["a", "b", "b", "a"],
    ...                    "predicted": ["a", "b", "a", "a"],
    ...                    "fold": [0, 0, 1, 1]})
    >>> t = tally_frame(df, by="fold")
    >>> t.dims
    ('fold', 'actual', 'predicted')
    >>> t.sel(fold=1).values.tolist()
    [[1, 0], [1, 0]]
    """
    if by is None:
        by = {}
    elif isinstance(by, str):
        by = {by: by}
    elif not isinstance(by, Mapping):
        by = {b: b for b in by}
    needed = [truth, pred, *by.values()] + ([weight] if weight else [])
    absent = [c for c in needed if c not in df.columns]
    if absent:
        raise InvalidInputError(
            f"column {absent[0]!r} not found; the table has columns {list(df.columns)!r}"
        )
    columns = {truth: df[truth], pred: df[pred]}
    if truth == pred:
        raise InvalidInputError(f"truth and pred name the same column {truth!r}")
    leading = {dim: df[col] for dim, col in by.items()}
    weights = None if weight is None else df[weight]
    attrs = {"truth_column": truth, "pred_column": pred}
    if by:
        attrs["by_columns"] = ",".join(f"{d}={c}" for d, c in by.items())
    if weight:
        attrs["weight_column"] = weight
    return _tally_columns(columns, leading, weights, classes, attrs=attrs)


def _tally_columns(columns, leading, weights, classes, *, attrs) -> xr.DataArray:
    (t_name, truth), (p_name, pred) = columns.items()
    counted = tally_columns({ACTUAL: (t_name, truth), PREDICTED: (p_name, pred)},
                            leading=leading, weights=weights, classes=classes, attrs=attrs,
                            sparse_above=DENSE_CELL_LIMIT)
    return validate_tensor(counted)


def tally_columns(columns, *, leading=None, weights=None, classes=None, attrs=None,
                  sparse_above: int | None = None) -> xr.DataArray:
    """Count samples by several label columns that share one class coordinate.

    The general form of :func:`tally`: a confusion tensor is the case of two
    columns, ``actual`` and ``predicted``; a paired comparison of two models
    counts three (``actual``, ``predicted_a``, ``predicted_b``).

    Parameters
    ----------
    columns : mapping of str to (str, array_like)
        Dim name -> (name used in messages, one label per sample). All columns
        are coded over one class list.
    leading : mapping of str to array_like, optional
        Dims that lead, e.g. ``{"fold": folds}``; their labels are sorted.
    weights : array_like, optional
        Non-negative sample weights; the counts become float64.
    classes : sequence, optional
        Fixed class order; labels outside it are an error. Without it the
        classes are every label seen in any column, sorted.
    attrs : dict, optional
        Provenance kept on the result (``n_rows`` and the version are added).
    sparse_above : int, optional
        Count into a ``sparse.COO`` array (only the cells seen) when the dense
        array would have more cells than this; None keeps it dense.

    Returns
    -------
    xarray.DataArray
        Named ``count``, dims ``(*leading, *columns)``, the class coordinate on
        every column dim; dense or sparse cells (see :mod:`foldcorr.tensor.backing`).

    Raises
    ------
    InvalidInputError
        On columns of different length, missing labels, labels outside
        ``classes``, or bad weights.

    Examples
    --------
    >>> j = tally_columns({"actual": ("truth", ["x", "y"]), "a": ("a", ["x", "x"]),
    ...                    "b": ("b", ["y", "y"])})
    >>> j.dims, int(j.sel(actual="y", a="x", b="y"))
    (('actual', 'a', 'b'), 1)
    """
    dims = list(columns)
    names = [columns[d][0] for d in dims]
    arrays = [_as_1d(columns[d][1], name) for d, name in zip(dims, names)]
    leading = dict(leading or {})
    n = len(arrays[0])
    _check_lengths(n, {**dict(zip(names[1:], arrays[1:])), **leading, "weights": weights})
    codes, labels, fixed = _encode_labels(arrays, names, classes)
    groups = [(dim, *_encode_one(_as_1d(values, dim), dim)) for dim, values in leading.items()]
    w = None if weights is None else _check_weights(weights)
    group_coords = {}
    for i, (dim, group, group_labels, direct) in enumerate(groups):
        if direct:  # integer labels used as codes: keep only those some row has
            (group,), group_labels = _seen([group], group_labels)
        groups[i] = (dim, group, group_labels, direct)
        group_coords[dim] = group_labels
    if not fixed:
        codes, labels = _seen(codes, labels)
    counts = _count([c for _, c, _, _ in groups] + list(codes),
                    [len(u) for _, _, u, _ in groups] + [len(labels)] * len(codes),
                    w, sparse_above)
    coords = {**group_coords, **{d: [py_value(x) for x in labels] for d in dims}}
    out = xr.DataArray(counts, dims=(*group_coords, *dims), coords=coords, name=COUNT)
    out.attrs.update({**(attrs or {}), "n_rows": n, "foldcorr_version": __version__})
    return out


def _as_1d(values, name: str):
    if isinstance(values, (pd.Series, pd.Index, pd.Categorical)):
        return values
    arr = np.asarray(values)
    if arr.ndim != 1:
        raise InvalidInputError(f"`{name}` must be one-dimensional; got shape {arr.shape!r}")
    return arr


def _check_lengths(n: int, others: Mapping) -> None:
    for name, values in others.items():
        if values is not None and len(values) != n:
            raise InvalidInputError(
                f"`{name}` has {len(values)} values but there are {n} truth labels"
            )


def _check_weights(weights) -> np.ndarray:
    try:
        w = np.asarray(weights, dtype=np.float64)
    except (TypeError, ValueError):
        raise InvalidInputError("weights must be numbers") from None
    bad = ~np.isfinite(w) | (w < 0)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise InvalidInputError(bad_weight_message(row, w[row]))
    return w


def _encode_labels(arrays, names, classes):
    """Integer codes for several label arrays over one shared class list.

    Returns the codes (one array per input), the labels, and whether the class
    list was fixed by the caller.
    """
    if classes is not None:
        labels = fixed_classes(classes)
        index = pd.Index(labels)
        codes = [index.get_indexer(pd.Index(_plain(v))) for v in arrays]
        for name, values, c in zip(names, arrays, codes):
            _raise_unknown(name, values, c, labels)
        return codes, labels, True
    for special in (_direct_codes, _categorical_codes, lambda a, _: arrow_text_codes(a)):
        found = special(arrays, names)
        if found is not None:  # categoricals and Arrow text can hold missing labels
            _raise_missing(np.concatenate(found[0]), [len(c) for c in found[0]], names)
            return (*found, False)
    plain = [_plain(v) for v in arrays]
    if len({p.dtype.kind for p in plain}) > 1:  # keep 1 and "1" apart
        plain = [p.astype(object) for p in plain]
    codes, uniques = pd.factorize(np.concatenate(plain), use_na_sentinel=True)
    _raise_missing(codes, [len(p) for p in plain], names)
    codes, uniques = sorted_codes(codes, np.asarray(uniques, dtype=object))
    return _split(codes, [len(p) for p in plain]), list(uniques), False


def _split(codes: np.ndarray, lengths) -> list:
    return np.split(codes, np.cumsum(lengths)[:-1])


def _plain(values) -> np.ndarray:
    if isinstance(values, (pd.Series, pd.Index)):
        return values.to_numpy(dtype=object) if values.dtype == object else values.to_numpy()
    return np.asarray(values)


def fixed_classes(classes) -> list:
    """A caller's class list, refused when empty or naming a class twice.

    Examples
    --------
    >>> fixed_classes(("b", "a"))
    ['b', 'a']
    >>> fixed_classes(["a", "a"])
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidInputError: `classes` lists 'a' more than once
    """
    labels = list(classes)
    if not labels:
        raise InvalidInputError("`classes` must name at least one class")
    seen = pd.Index(labels)
    if seen.has_duplicates:
        dup = seen[seen.duplicated()][0]
        raise InvalidInputError(f"`classes` lists {dup!r} more than once")
    return labels


def _raise_unknown(name, values, codes, labels) -> None:
    bad = np.flatnonzero(codes < 0)
    if bad.size:
        row = int(bad[0])
        value = py_value(np.asarray(values)[row])
        raise InvalidInputError(unknown_label_message(name, row, value, bad.size, labels))


def unknown_label_message(name: str, row: int, value, n_bad: int, labels) -> str:
    """The message for a label outside a fixed class list.

    Shared by the in-memory tally and the streaming sources, so both word it
    the same way.

    Parameters
    ----------
    name : str
        Column name.
    row : int
        Zero-based row of the first offending label.
    value : object
        That label.
    n_bad : int
        Number of rows outside the classes.
    labels : sequence
        The fixed classes.

    Returns
    -------
    str

    Examples
    --------
    >>> unknown_label_message("actual", 2, "owl", 1, ["cat", "dog"])
    "column 'actual' row 3: label 'owl' is not among the classes ['cat', 'dog'] (1 rows outside them)"
    >>> unknown_label_message("actual", 0, None, 1, ["cat"])
    "column 'actual' row 1: label nan is not among the classes ['cat'] (1 rows outside them)"
    """
    if value is None or (pd.api.types.is_scalar(value) and bool(pd.isna(value))):
        value = float("nan")  # None, NaN or pandas' NA: shown alike whatever the reader
    labels = list(labels)
    shown = ", ".join(repr(c) for c in labels[:10]) + (", ..." if len(labels) > 10 else "")
    return (f"column {name!r} row {row + 1}: label {value!r} is not among the classes "
            f"[{shown}] ({n_bad} rows outside them)")


def bad_weight_message(row: int, value) -> str:
    """The message for a negative or non-finite weight at zero-based ``row``.

    Examples
    --------
    >>> bad_weight_message(1, -2.0)
    'weights must be finite and non-negative; got -2.0 at row 2'
    """
    return f"weights must be finite and non-negative; got {float(value)!r} at row {row + 1}"


def missing_label_message(name: str, row: int, n_missing: int) -> str:
    """The message for a missing truth or predicted label (see :func:`unknown_label_message`).

    Examples
    --------
    >>> missing_label_message("predicted", 0, 2)
    "column 'predicted' row 1: missing label (2 missing in all)"
    """
    return f"column {name!r} row {row + 1}: missing label ({n_missing} missing in all)"


def _raise_missing(codes, lengths, names) -> None:
    bad = np.flatnonzero(codes < 0)
    if bad.size:
        i = int(bad[0])
        ends = np.cumsum(lengths)
        which = int(np.searchsorted(ends, i, side="right"))
        row = i - (int(ends[which - 1]) if which else 0)
        raise InvalidInputError(missing_label_message(names[which], row, bad.size))


def _direct_codes(arrays, names=None):
    """Codes for small non-negative integer (or boolean) labels, no hashing."""
    out = []
    for values in arrays:
        if isinstance(values, (pd.Series, pd.Index)):
            if not (pd.api.types.is_integer_dtype(values.dtype) or values.dtype == bool):
                return None
            if not isinstance(values.dtype, np.dtype):
                return None
            values = values.to_numpy()
        if not isinstance(values, np.ndarray):
            return None
        if values.dtype == bool:
            values = values.view(np.uint8)
        elif not np.issubdtype(values.dtype, np.integer):
            return None
        out.append(values)
    if out[0].size == 0:
        return None
    lo = min(int(a.min()) for a in out)
    hi = max(int(a.max()) for a in out)
    if lo < 0 or hi >= _DIRECT_MAX:
        return None
    labels = np.arange(hi + 1)
    if all(getattr(v, "dtype", None) == bool for v in arrays):
        labels = labels.astype(bool)
    return out, list(labels)


def _categorical_codes(arrays, names):
    cats = [_categorical(v) for v in arrays]
    if any(c is None for c in cats):
        return None
    union = cats[0].categories
    for c in cats[1:]:
        if not c.categories.equals(union):
            union = union.union(c.categories, sort=False)
    cats = [c if c.categories.equals(union) else c.set_categories(union) for c in cats]
    return [c.codes.astype(np.int64) for c in cats], list(union)


def _categorical(values):
    if isinstance(values, pd.Categorical):
        return values
    if isinstance(values, (pd.Series, pd.Index)) and isinstance(values.dtype, pd.CategoricalDtype):
        return pd.Categorical(values)
    return None


def sorted_codes(codes: np.ndarray, uniques: np.ndarray):
    """Recode factorised labels so the codes follow the sorted labels.

    Labels that do not compare with each other (say 1 and "1") are sorted by
    type name, then text.

    Examples
    --------
    >>> codes, labels = sorted_codes(np.array([0, 1, 0]), np.array(["dog", "cat"], dtype=object))
    >>> codes.tolist(), labels.tolist()
    ([1, 0, 1], ['cat', 'dog'])
    """
    try:
        order = np.argsort(uniques, kind="stable")
    except TypeError:
        order = np.argsort(np.array([f"{type(u).__name__}:{u}" for u in uniques]), kind="stable")
    rank = np.empty(len(order), dtype=np.int64)
    rank[order] = np.arange(len(order))
    return rank[codes], uniques[order]


def _encode_one(values, name: str):
    """Codes, sorted unique values, and whether the codes are the values themselves."""
    direct = _direct_codes([values])
    if direct is not None:
        (codes,), labels = direct
        return codes, [py_value(v) for v in labels], True
    codes, uniques = pd.factorize(_plain(values), use_na_sentinel=True)
    bad = np.flatnonzero(codes < 0)
    if bad.size:
        raise InvalidInputError(f"column {name!r} row {int(bad[0]) + 1}: missing value")
    codes, uniques = sorted_codes(codes, np.asarray(uniques, dtype=object))
    return codes, [py_value(u) for u in uniques], False


def _seen(codes: list, labels: list):
    """Codes and labels of only the labels some row has (codes renumbered in order)."""
    seen = _occurring(codes, len(labels))
    if seen.all():
        return codes, list(labels)
    keep = np.flatnonzero(seen)
    renumber = np.cumsum(seen) - 1
    return [renumber[c] for c in codes], [labels[i] for i in keep]


def _count(codes: list, shape: list, weights, sparse_above):
    """Count into a dense array, or a sparse one when it would exceed ``sparse_above`` cells."""
    cells = int(np.prod(shape, dtype=np.float64))
    if sparse_above is not None and cells > sparse_above:
        return count_sparse(codes, shape, weights=weights)
    return count_codes(codes, shape, weights=weights)


def count_codes(codes: Sequence[np.ndarray], shape: Sequence[int], *, weights=None,
                out: np.ndarray | None = None) -> np.ndarray:
    """Count rows of integer codes into a dense array.

    Row ``i`` adds one (or ``weights[i]``) to the cell
    ``(codes[0][i], codes[1][i], ...)`` of an array of shape ``shape``. This
    is the one counting step of the tensor layer; the streaming sources call
    it batch by batch.

    Parameters
    ----------
    codes : sequence of numpy.ndarray
        One integer array per dim, all of the same length, with
        ``0 <= codes[d] < shape[d]``.
    shape : sequence of int
        Size of each dim.
    weights : numpy.ndarray, optional
        One float weight per row.
    out : numpy.ndarray, optional
        A C-contiguous array of shape ``shape`` to add the counts into, in
        place (int64 or uint32 for counts, float64 for weights); no array of
        the size of ``shape`` is allocated then, which suits many small
        batches. The caller keeps a uint32 ``out`` from overflowing (it holds
        at most 2**32 - 1 per cell).

    Returns
    -------
    numpy.ndarray
        int64 counts, or float64 sums of weights, of shape ``shape``
        (``out`` itself when given).

    Raises
    ------
    TensorTooLargeError
        When the array would need more memory than is free (checked first).

    Notes
    -----
    The cell is found by the mixed-radix index
    ``((c_0 * n_1 + c_1) * n_2 + c_2) ...``, computed in int32 when the array
    has fewer than 2**31 cells (half the memory traffic of int64), and counted
    with one ``numpy.bincount``, so the cost is O(rows + cells); with ``out``
    it is added in place with ``numpy.add.at``, O(rows), which beats a
    ``bincount`` plus an array-wide add unless a batch has many more rows
    than the array has cells.

    Examples
    --------
    >>> count_codes([np.array([0, 1, 1]), np.array([1, 1, 0])], [2, 2]).tolist()
    [[0, 1], [1, 1]]
    >>> acc = np.zeros((2, 2), dtype=np.int64)
    >>> count_codes([np.array([1]), np.array([0])], [2, 2], out=acc).tolist()
    [[0, 0], [1, 0]]
    """
    if not codes:
        raise ValueError("count_codes needs at least one array of codes")
    if out is None:
        check_dense_size(shape, np.int64)
    total = int(np.prod(shape, dtype=np.int64))
    itype = np.int32 if total <= np.iinfo(np.int32).max else np.int64
    index = None
    for c, size in zip(codes[1:], shape[1:]):
        if index is None:  # a new array, built up in place below
            index = np.multiply(codes[0], size, dtype=itype)
        else:
            index *= size
        c = np.asarray(c)
        index += c if c.dtype == itype or c.dtype.itemsize < index.dtype.itemsize \
            else c.astype(itype)
    if index is None:
        index = np.array(codes[0], dtype=itype)
    if out is not None:
        # A one of out's own type keeps numpy on its fast indexed loop.
        np.add.at(out.reshape(-1), index, out.dtype.type(1) if weights is None else weights)
        return out
    counts = np.bincount(index, weights=weights, minlength=total)
    if weights is None:
        counts = counts.astype(np.int64, copy=False)
    return counts.reshape(*shape)


def _occurring(class_codes: list, k: int) -> np.ndarray:
    return sum(np.bincount(c, minlength=k) for c in class_codes) > 0



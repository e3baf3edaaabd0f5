"""Counts already aggregated: rows of (actual, predicted, [fold], count).

A warehouse ``GROUP BY actual, predicted, fold`` gives one row per cell with
its count. Read with ``count=`` (``--count COL``), each row stands for that
many samples: the tensor is the int64 tensor the expanded rows give, so
intervals and every figure work as on samples. The engines read the count
column as a weight (summed exactly in float64 below 2**53) once
:func:`whole_counts` has checked every value, and :func:`as_counts` gives the
tensor its int64 type back.
"""

from __future__ import annotations

import numpy as np

from foldcorr.errors import InvalidInputError

__all__ = ["whole_counts", "as_counts", "MAX_EXACT"]

#: Counts sum exactly in float64 up to this total.
MAX_EXACT = 2 ** 53


def _as_numbers(column: str, arr, offset: int) -> np.ndarray:
    """A count column as float64, refusing a value that is not a number, naming its row."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks()
    if pa.types.is_dictionary(arr.type):
        arr = arr.dictionary_decode()
    if pa.types.is_boolean(arr.type) or not (pa.types.is_integer(arr.type)
                                             or pa.types.is_floating(arr.type)
                                             or pa.types.is_string(arr.type)
                                             or pa.types.is_large_string(arr.type)
                                             or pa.types.is_null(arr.type)):
        raise InvalidInputError(f"column {column!r} row {offset + 1}: count "
                                f"{arr[0].as_py()!r} is not a number")
    if pa.types.is_string(arr.type) or pa.types.is_large_string(arr.type):
        arr = pc.utf8_trim_whitespace(arr)
        try:
            arr = pc.cast(arr, pa.float64())
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            for i, value in enumerate(arr.to_pylist()):
                try:
                    float(value if value is not None else "nan")
                except ValueError:
                    raise InvalidInputError(f"column {column!r} row {offset + i + 1}: count "
                                            f"{value!r} is not a number") from None
            raise
    return arr.to_numpy(zero_copy_only=False).astype(np.float64)


def whole_counts(batch, column: str, offset: int = 0):
    """``batch`` with its count column as float64, every value a whole number >= 0.

    Parameters
    ----------
    batch : pyarrow.RecordBatch or pyarrow.Table
        Rows of labels and counts.
    column : str
        The count column.
    offset : int, default 0
        Rows of the same file before this batch (for the row number in messages).

    Returns
    -------
    pyarrow.Table

    Raises
    ------
    InvalidInputError
        On a count that is missing, negative, fractional or not a number,
        naming the column and the row (counted from 1).

    Examples
    --------
    >>> import pyarrow as pa
    >>> b = pa.record_batch({"actual": ["a", "b"], "n": ["3", "2"]})
    >>> whole_counts(b, "n").column("n").to_pylist()
    [3.0, 2.0]
    >>> whole_counts(pa.record_batch({"n": [1, -2]}), "n", offset=10)
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidInputError: column 'n' row 12: count -2 is not a whole number >= 0
    """
    import pyarrow as pa

    values = _as_numbers(column, batch.column(column), offset)
    with np.errstate(invalid="ignore"):
        bad = ~np.isfinite(values) | (values < 0) | (values != np.floor(values))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        shown = batch.column(column)[i].as_py() if np.isnan(values[i]) else \
            (int(values[i]) if float(values[i]).is_integer() else float(values[i]))
        raise InvalidInputError(f"column {column!r} row {offset + i + 1}: count {shown!r} "
                                f"is not a whole number >= 0")
    table = batch if isinstance(batch, pa.Table) else pa.Table.from_batches([batch])
    return table.set_column(table.schema.get_field_index(column), column,
                            pa.array(values, pa.float64()))


def as_counts(tensor, column: str):
    """A tensor tallied from counts, as int64, with ``count_column`` in its provenance.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[2.0, 1.0], [0.0, 3.0]], ["a", "b"],
    ...                      attrs={"weight_column": "n"})
    >>> c = as_counts(t, "n")
    >>> str(c.dtype), c.attrs["count_column"], "weight_column" in c.attrs
    ('int64', 'n', False)
    """
    total = float(tensor.data.sum())   # a scalar from either backing
    if total >= MAX_EXACT:
        raise InvalidInputError(f"column {column!r}: the counts add up to {total:.0f}, more "
                                f"than float64 sums exactly ({MAX_EXACT})")
    attrs = {k: v for k, v in tensor.attrs.items() if k != "weight_column"}
    attrs["count_column"] = column
    out = tensor.round().astype(np.int64)
    out.attrs = attrs
    return out

"""Counts matrices: a CSV of counts, actual labels down and predicted labels across.

The first column holds the actual class labels, the header row the predicted
class labels (after a first header cell that is ignored), and every cell a
non-negative integer count. Every problem is an
:class:`~foldcorr.errors.InvalidInputError` naming the file, and the row and
column where that applies.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr.sources.problems import file_error, first_line
from foldcorr.tensor import ACTUAL, PREDICTED, confusion_tensor

__all__ = ["read_matrix", "reorder_classes"]


def read_matrix(path) -> xr.DataArray:
    """Read a counts matrix CSV: actual labels down, predicted labels across.

    Parameters
    ----------
    path : str or path-like
        CSV whose first column holds actual class labels, whose header row
        holds predicted class labels (after a first header cell that is
        ignored), and whose cells are non-negative integers. Labels are
        taken as typed (whitespace kept, ``NA`` a label like any other).

    Returns
    -------
    xarray.DataArray
        The 2-D tensor. Columns in another order than the rows are put in
        row order.

    Raises
    ------
    InvalidInputError
        When the matrix is not square, its row and column labels differ,
        a label repeats, or a cell is empty, negative, not an integer or
        above the int64 range (naming its row and column), or the total is;
        or every cell is 0 (no samples, like a table without rows).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "m.csv"
    >>> _ = p.write_text(",cat,dog\\ncat,5,1\\ndog,2,7\\n")
    >>> read_matrix(p).values.tolist()
    [[5, 1], [2, 7]]
    """
    path = Path(path)
    if not path.is_file():
        raise file_error(path, "file not found")
    try:
        raw = pd.read_csv(path, dtype=str, keep_default_na=False, header=None,
                          encoding="utf-8-sig")
    except (ValueError, pd.errors.ParserError, UnicodeDecodeError) as exc:
        raise file_error(path, f"cannot read as a counts matrix: {first_line(exc)}") from None
    if raw.shape[0] < 2 or raw.shape[1] < 2:
        raise file_error(path, "a counts matrix needs a header row, a label column and at least one cell")
    cols = list(raw.iloc[0, 1:])  # labels as typed, whitespace kept (as in tables)
    rows = list(raw.iloc[1:, 0])
    _check_matrix_labels(path, rows, cols)
    cells = raw.iloc[1:, 1:].to_numpy()
    counts = _parse_counts(path, cells, rows, cols)
    if not counts.any():  # as a table without rows: nothing to score
        raise file_error(path, "the counts matrix holds no samples: every cell is 0")
    order = [cols.index(r) for r in rows]
    t = confusion_tensor(counts[:, order], rows, attrs={"source": path.name, "n_rows": 0})
    t.attrs["n_rows"] = int(counts.sum())
    return t


def _check_matrix_labels(path, rows, cols) -> None:
    if len(rows) != len(cols):
        raise file_error(path, f"a counts matrix must be square; got {len(rows)} rows and {len(cols)} columns")
    for name, labels in (("row", rows), ("column", cols)):
        seen = set()
        for label in labels:
            if label in seen:
                raise file_error(path, f"{name} label {label!r} appears more than once")
            seen.add(label)
    if set(rows) != set(cols):
        only_rows = sorted(set(rows) - set(cols))
        only_cols = sorted(set(cols) - set(rows))
        raise file_error(path, f"row and column labels differ: rows only {only_rows!r}, "
                               f"columns only {only_cols!r}")


def _parse_counts(path, cells: np.ndarray, rows, cols) -> np.ndarray:
    flat = pd.Series(cells.ravel(), dtype=object).str.strip()
    ok = flat.str.fullmatch(r"\+?[0-9]+").to_numpy(dtype=bool)
    if not ok.all():
        i, j = np.unravel_index(int(np.flatnonzero(~ok)[0]), cells.shape)
        text = flat.iloc[i * cells.shape[1] + j]
        what = "is empty" if not text else f"{text!r} is not a non-negative integer"
        raise file_error(path, f"row {rows[i]!r} column {cols[j]!r} (line {i + 2}): cell {what}")
    digits = flat.str.lstrip("+").str.lstrip("0")
    limit = str(_INT64_MAX)
    big = ((digits.str.len() > len(limit))
           | ((digits.str.len() == len(limit)) & (digits > limit))).to_numpy(dtype=bool)
    if big.any():
        i, j = np.unravel_index(int(np.flatnonzero(big)[0]), cells.shape)
        raise file_error(path, f"row {rows[i]!r} column {cols[j]!r} (line {i + 2}): count "
                               f"{flat.iloc[i * cells.shape[1] + j]!r} is above the largest count "
                               f"held exactly, {_INT64_MAX} (int64)")
    counts = flat.astype(np.int64).to_numpy().reshape(cells.shape)
    total = sum(int(v) for v in counts.sum(axis=1, dtype=object))
    if total > _INT64_MAX:
        raise file_error(path, f"the counts add up to {total}, above the largest total held exactly, "
                               f"{_INT64_MAX} (int64)")
    return counts


_INT64_MAX = int(np.iinfo(np.int64).max)


def reorder_classes(path, t: xr.DataArray, classes, what: str = "matrix") -> xr.DataArray:
    """A tensor of counts with its classes put in the order of ``classes``.

    Parameters
    ----------
    path : str or path-like
        The file the counts came from (named in the message).
    t : xarray.DataArray
        The tensor.
    classes : sequence
        Every class of ``t`` (compared as text), in the order wanted.
    what : str, default "matrix"
        What the file is, in the message.

    Returns
    -------
    xarray.DataArray

    Raises
    ------
    InvalidInputError
        When ``classes`` and the tensor's classes differ.

    Examples
    --------
    >>> t = confusion_tensor([[5, 1], [2, 7]], ["cat", "dog"])
    >>> reorder_classes("m.csv", t, ["dog", "cat"]).values.tolist()
    [[7, 2], [1, 5]]
    """
    have = [str(c) for c in t.coords[ACTUAL].values]
    wanted = [str(c) for c in classes]
    unknown = [c for c in wanted if c not in have]
    missing = [c for c in have if c not in wanted]
    if unknown or missing:
        raise file_error(path, f"`classes` does not match the {what} labels: not in the {what} "
                               f"{unknown!r}, not in `classes` {missing!r}")
    by_text = dict(zip(have, t.coords[ACTUAL].values.tolist()))
    order = [by_text[c] for c in wanted]
    return t.sel({ACTUAL: order, PREDICTED: order})

"""The sources layer: prediction tables and count matrices from files.

Prediction tables hold one row per sample (CSV, Parquet or JSON Lines, chosen
by the file ending); count matrices are CSV files whose first column holds the
actual class labels and whose header row holds the predicted class labels.
Every problem is reported as an :class:`~foldcorr.errors.InvalidInputError`
whose message names the file, and the column and row where that applies.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr.errors import InvalidInputError, OptionError
from foldcorr.tensor import ACTUAL, FOLD, PREDICTED, confusion_tensor, tally_frame

__all__ = ["TableSpec", "read_table", "read_matrix", "load_tensor", "check_saved_options",
           "TABLE_SUFFIXES"]

from foldcorr.sources.stream import TABLE_SUFFIXES  # noqa: E402  (one list for both paths)


@dataclass(frozen=True)
class TableSpec:
    """Which columns of a prediction table mean what.

    Attributes
    ----------
    truth, pred : str
        Columns of actual and predicted labels.
    fold : str or None
        Column of fold labels; ``"auto"`` uses a column named ``fold`` when
        there is one.
    weight : str or None
        Column of sample weights.
    classes : tuple or None
        Fixed class order; labels outside it are an error.
    """

    truth: str = ACTUAL
    pred: str = PREDICTED
    fold: str | None = "auto"
    weight: str | None = None
    classes: tuple | None = None


def _fail(path, message: str) -> InvalidInputError:
    return InvalidInputError(f"{Path(path).name}: {message}")


def _format_of(path: Path) -> str:
    fmt = TABLE_SUFFIXES.get(path.suffix.lower())
    if fmt is None:
        known = ", ".join(sorted(TABLE_SUFFIXES))
        raise _fail(path, f"unknown file type {path.suffix!r}; expected one of {known}")
    return fmt


def read_table(path, columns=None) -> pd.DataFrame:
    """Read a prediction table, only the named columns where the format allows.

    Parameters
    ----------
    path : str or path-like
        A ``.csv``, ``.tsv``, ``.parquet`` or ``.jsonl`` file.
    columns : list of str, optional
        Columns to read; all when None.

    Returns
    -------
    pandas.DataFrame

    Raises
    ------
    InvalidInputError
        When the file is missing, unreadable, of unknown type or empty.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted\\ncat,dog\\n")
    >>> read_table(p).shape
    (1, 2)
    """
    path = Path(path)
    if not path.is_file():
        raise _fail(path, "file not found")
    fmt = _format_of(path)
    try:
        df = _read(path, fmt, columns)
    except InvalidInputError:
        raise
    except (ValueError, OSError, pd.errors.ParserError, UnicodeDecodeError) as exc:
        raise _fail(path, f"cannot read as {fmt}: {_first_line(exc)}") from None
    except Exception as exc:  # pyarrow raises its own error types
        raise _fail(path, f"cannot read as {fmt}: {_first_line(exc)}") from None
    if len(df) == 0:
        raise _fail(path, "the table has no rows")
    return df


def _first_line(exc: Exception) -> str:
    text = str(exc).strip().splitlines()
    return text[0] if text else type(exc).__name__


def _read(path: Path, fmt: str, columns) -> pd.DataFrame:
    if fmt in ("csv", "tsv"):
        if path.stat().st_size == 0:
            raise _fail(path, "the file is empty")
        sep = "," if fmt == "csv" else "\t"
        usecols = None if columns is None else (lambda c: c in set(columns))
        return pd.read_csv(path, sep=sep, usecols=usecols, encoding="utf-8-sig")
    if fmt == "parquet":
        import pyarrow.parquet as pq

        schema = pq.read_schema(path)
        cols = None if columns is None else [c for c in columns if c in schema.names]
        return pq.read_table(path, columns=cols).to_pandas()
    df = pd.read_json(path, lines=True)
    return df if columns is None else df[[c for c in columns if c in df.columns]]


def load_tensor(path, spec: TableSpec = TableSpec(), *, matrix: bool = False, where=None,
                skip_bad_files: bool = False, progress: bool | None = False,
                engine: str = "local", scheduler=None) -> xr.DataArray:
    """Read a prediction table (or a dataset of them) or a counts matrix into a tensor.

    Prediction tables are streamed batch by batch (see
    :func:`foldcorr.sources.stream.stream_tensor`): memory is bounded by the batch
    size and the tensor, not by the number of rows, and the result is the
    tensor :func:`foldcorr.tensor.tally_frame` gives on the whole table.

    Parameters
    ----------
    path : str or path-like
        Prediction table, a folder or a glob of them, a counts matrix CSV
        when ``matrix`` is true, or a saved evaluation (``.nc``, see
        :mod:`foldcorr.sources.saved`).
    spec : TableSpec
        Column roles (ignored for a matrix, except ``classes``). With a saved
        evaluation only ``classes`` applies (it reorders the saved classes);
        the other options are refused (see :func:`check_saved_options`).
    matrix : bool, default False
        Read ``path`` as a counts matrix.
    where : str, optional
        Row filter, e.g. ``'split == "test"'`` (see
        :func:`foldcorr.sources.stream.parse_where`).
    skip_bad_files : bool, default False
        Skip unreadable files of a dataset (listed in ``attrs["skipped_files"]``).
    progress : bool or None, default False
        Progress bar on stderr; None shows it when stderr is a terminal.
    engine : {"local", "dask"}
        Where the tally runs (see :func:`foldcorr.sources.stream.tally_dataset`).
    scheduler : str, optional
        Address of a Dask scheduler (engine "dask").

    Returns
    -------
    xarray.DataArray
        The tensor, with ``source`` and the columns used in ``attrs``.

    Raises
    ------
    InvalidInputError
        On any problem with the file, naming file, column and row.
    OptionError
        When a table-only option is given with a saved evaluation.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted,fold\\na,a,1\\nb,a,1\\nb,b,2\\n")
    >>> load_tensor(p).dims
    ('fold', 'actual', 'predicted')
    """
    from foldcorr.sources.saved import is_saved_path, load_saved

    if is_saved_path(path):  # a saved evaluation (NetCDF) stands wherever a table can
        check_saved_options(path, spec, matrix=matrix, where=where,
                            skip_bad_files=skip_bad_files, engine=engine, scheduler=scheduler)
        t = load_saved(path).tensor
        return t if spec.classes is None else _reorder_matrix(path, t, spec.classes,
                                                              "saved evaluation")
    if matrix:
        t = read_matrix(path)
        if spec.classes is not None:
            t = _reorder_matrix(path, t, spec.classes)
        return t
    from foldcorr.sources.stream import tally_dataset

    return tally_dataset(path, truth=spec.truth, pred=spec.pred, fold=spec.fold,
                         weight=spec.weight, classes=spec.classes, where=where,
                         skip_bad_files=skip_bad_files, progress=progress,
                         engine=engine, scheduler=scheduler).tensor


def check_saved_options(path, spec: TableSpec = TableSpec(), *, matrix: bool = False,
                        where=None, skip_bad_files: bool = False, engine: str = "local",
                        scheduler=None, id_column: str | None = None) -> None:
    """Refuse options that describe a prediction table, given with a saved evaluation.

    A saved evaluation holds counts already tallied: which columns they came
    from, which rows were kept and how they were weighted cannot be changed
    afterwards. Only ``spec.classes`` applies, as a new class order.

    Parameters
    ----------
    path : str or path-like
        The saved evaluation (named in the message).
    spec : TableSpec
        Column roles; any but ``classes`` differing from the defaults is refused.
    matrix, where, skip_bad_files, engine, scheduler, id_column
        Options of :func:`load_tensor` (and the sample-id column); any set is
        refused.

    Raises
    ------
    OptionError
        Naming the first option that does not apply (with its command-line
        flag).

    Examples
    --------
    >>> check_saved_options("run.nc", TableSpec(classes=("a", "b")))
    >>> check_saved_options("run.nc", where="fold == 1")
    Traceback (most recent call last):
    ...
    foldcorr.errors.OptionError: run.nc is a saved evaluation: its counts are already tallied, so `where` (--where) cannot apply; 'fold == 1' was given. Only `classes` (--classes) applies to a saved file
    """
    default = TableSpec()
    given = [("truth", spec.truth != default.truth, spec.truth),
             ("pred", spec.pred != default.pred, spec.pred),
             ("fold", spec.fold != default.fold, spec.fold),
             ("weight", spec.weight is not None, spec.weight),
             ("matrix", bool(matrix), matrix),
             ("where", where is not None, getattr(where, "text", where)),
             ("skip_bad_files", bool(skip_bad_files), skip_bad_files),
             ("engine", engine != "local", engine),
             ("scheduler", scheduler is not None, scheduler),
             ("id", id_column is not None, id_column)]
    for name, is_set, value in given:
        if is_set:
            flag = "--" + name.replace("_", "-")
            raise OptionError(f"{Path(path).name} is a saved evaluation: its counts are already "
                              f"tallied, so `{name}` ({flag}) cannot apply; {value!r} was given. "
                              "Only `classes` (--classes) applies to a saved file")


def _load_in_memory(path, spec: TableSpec = TableSpec()) -> xr.DataArray:
    """The whole table in memory, then :func:`~foldcorr.tensor.tally_frame`.

    The reference the streaming path must agree with (kept for the tests and
    for comparison in the benchmarks); :func:`load_tensor` does not use it.
    """
    path = Path(path)
    df = read_table(path, columns=_wanted(spec))
    fold = _fold_column(path, df, spec)
    _require_columns(path, df, [spec.truth, spec.pred, fold, spec.weight])
    classes = None if spec.classes is None else _coerce_classes(spec.classes, df[spec.truth])
    truth, pred = _comparable(df[spec.truth], df[spec.pred])
    frame = df.assign(**{spec.truth: truth, spec.pred: pred})
    try:
        t = tally_frame(frame, truth=spec.truth, pred=spec.pred,
                        by=None if fold is None else {FOLD: fold},
                        weight=spec.weight, classes=classes)
    except InvalidInputError as exc:
        raise _fail(path, str(exc)) from None
    t.attrs["source"] = path.name
    if fold is not None:
        t.attrs["fold_column"] = fold
    return t


def _wanted(spec: TableSpec) -> list[str]:
    cols = [spec.truth, spec.pred, spec.weight, FOLD if spec.fold == "auto" else spec.fold]
    return [c for c in cols if c]


def _fold_column(path, df, spec) -> str | None:
    if spec.fold == "auto":
        return FOLD if FOLD in df.columns else None
    return spec.fold


def _require_columns(path, df, names) -> None:
    for name in names:
        if name is not None and name not in df.columns:
            raise _fail(path, f"column {name!r} not found; the table has {_column_names(path)!r}")


def _column_names(path: Path) -> list[str]:
    fmt = _format_of(path)
    if fmt in ("csv", "tsv"):
        sep = "," if fmt == "csv" else "\t"
        return list(pd.read_csv(path, sep=sep, nrows=0, encoding="utf-8-sig").columns)
    if fmt == "parquet":
        import pyarrow.parquet as pq

        return list(pq.read_schema(path).names)
    return list(pd.read_json(path, lines=True, nrows=1).columns)


def _comparable(truth: pd.Series, pred: pd.Series):
    """Make truth and pred comparable when one is numeric and the other text."""
    numeric = [pd.api.types.is_numeric_dtype(s) and not pd.api.types.is_bool_dtype(s)
               for s in (truth, pred)]
    if numeric[0] != numeric[1]:
        return _as_text(truth), _as_text(pred)
    return truth, pred


def _as_text(s: pd.Series) -> pd.Series:
    if pd.api.types.is_float_dtype(s):
        whole = s.dropna()
        if len(whole) and (whole == np.round(whole)).all():
            s = s.astype("Int64")
    return s.astype(object).where(s.notna(), None).map(lambda v: v if v is None else str(v))


def _coerce_classes(classes, column: pd.Series) -> tuple:
    """Convert class names given as text to the column's type where it is numeric."""
    if pd.api.types.is_integer_dtype(column) or pd.api.types.is_float_dtype(column):
        caster = int if pd.api.types.is_integer_dtype(column) else float
        try:
            return tuple(caster(c) for c in classes)
        except (TypeError, ValueError):
            return tuple(classes)
    return tuple(classes)


def read_matrix(path) -> xr.DataArray:
    """Read a counts matrix CSV: actual labels down, predicted labels across.

    Parameters
    ----------
    path : str or path-like
        CSV whose first column holds actual class labels, whose header row
        holds predicted class labels (after a first header cell that is
        ignored), and whose cells are non-negative integers.

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
        raise _fail(path, "file not found")
    try:
        raw = pd.read_csv(path, dtype=str, keep_default_na=False, header=None,
                          encoding="utf-8-sig")
    except (ValueError, pd.errors.ParserError, UnicodeDecodeError) as exc:
        raise _fail(path, f"cannot read as a counts matrix: {_first_line(exc)}") from None
    if raw.shape[0] < 2 or raw.shape[1] < 2:
        raise _fail(path, "a counts matrix needs a header row, a label column and at least one cell")
    cols = [c.strip() for c in raw.iloc[0, 1:]]
    rows = [r.strip() for r in raw.iloc[1:, 0]]
    _check_matrix_labels(path, rows, cols)
    cells = raw.iloc[1:, 1:].to_numpy()
    counts = _parse_counts(path, cells, rows, cols)
    if not counts.any():  # as a table without rows: nothing to score
        raise _fail(path, "the counts matrix holds no samples: every cell is 0")
    order = [cols.index(r) for r in rows]
    t = confusion_tensor(counts[:, order], rows, attrs={"source": path.name, "n_rows": 0})
    t.attrs["n_rows"] = int(counts.sum())
    return t


def _check_matrix_labels(path, rows, cols) -> None:
    if len(rows) != len(cols):
        raise _fail(path, f"a counts matrix must be square; got {len(rows)} rows and {len(cols)} columns")
    for name, labels in (("row", rows), ("column", cols)):
        seen = set()
        for label in labels:
            if label in seen:
                raise _fail(path, f"{name} label {label!r} appears more than once")
            seen.add(label)
    if set(rows) != set(cols):
        only_rows = sorted(set(rows) - set(cols))
        only_cols = sorted(set(cols) - set(rows))
        raise _fail(path, f"row and column labels differ: rows only {only_rows!r}, "
                          f"columns only {only_cols!r}")


def _parse_counts(path, cells: np.ndarray, rows, cols) -> np.ndarray:
    flat = pd.Series(cells.ravel(), dtype=object).str.strip()
    ok = flat.str.fullmatch(r"\+?[0-9]+").to_numpy(dtype=bool)
    if not ok.all():
        i, j = np.unravel_index(int(np.flatnonzero(~ok)[0]), cells.shape)
        text = flat.iloc[i * cells.shape[1] + j]
        what = "is empty" if not text else f"{text!r} is not a non-negative integer"
        raise _fail(path, f"row {rows[i]!r} column {cols[j]!r} (line {i + 2}): cell {what}")
    digits = flat.str.lstrip("+").str.lstrip("0")
    limit = str(_INT64_MAX)
    big = ((digits.str.len() > len(limit))
           | ((digits.str.len() == len(limit)) & (digits > limit))).to_numpy(dtype=bool)
    if big.any():
        i, j = np.unravel_index(int(np.flatnonzero(big)[0]), cells.shape)
        raise _fail(path, f"row {rows[i]!r} column {cols[j]!r} (line {i + 2}): count "
                          f"{flat.iloc[i * cells.shape[1] + j]!r} is above the largest count "
                          f"held exactly, {_INT64_MAX} (int64)")
    counts = flat.astype(np.int64).to_numpy().reshape(cells.shape)
    total = sum(int(v) for v in counts.sum(axis=1, dtype=object))
    if total > _INT64_MAX:
        raise _fail(path, f"the counts add up to {total}, above the largest total held exactly, "
                          f"{_INT64_MAX} (int64)")
    return counts


_INT64_MAX = int(np.iinfo(np.int64).max)


def _reorder_matrix(path, t: xr.DataArray, classes, what: str = "matrix") -> xr.DataArray:
    have = [str(c) for c in t.coords[ACTUAL].values]
    wanted = [str(c) for c in classes]
    unknown = [c for c in wanted if c not in have]
    missing = [c for c in have if c not in wanted]
    if unknown or missing:
        raise _fail(path, f"`classes` does not match the {what} labels: not in the {what} "
                          f"{unknown!r}, not in `classes` {missing!r}")
    by_text = dict(zip(have, t.coords[ACTUAL].values.tolist()))
    order = [by_text[c] for c in wanted]
    return t.sel({ACTUAL: order, PREDICTED: order})

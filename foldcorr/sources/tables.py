"""Prediction tables read whole with pandas: the frame path beside the stream path.

Prediction tables hold one row per sample (CSV, Parquet or JSON Lines, chosen
by the file ending through :func:`foldcorr.sources.formats.format_for`). The
readers that need a whole table (paired comparisons, multilabel tables,
per-sample ids) read it here, and :func:`_load_in_memory` is the in-memory
reference the stream path must agree with. Every problem is reported as an
:class:`~foldcorr.errors.InvalidInputError` whose message names the file, and
the column and row where that applies.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import pandas as pd
import xarray as xr

from foldcorr.errors import InvalidInputError
from foldcorr.sources.formats import TABLE_FORMATS, format_for
from foldcorr.sources.locations import local_or_bytes
from foldcorr.sources.problems import file_error
from foldcorr.tensor import ACTUAL, FOLD, PREDICTED, tally_frame
from foldcorr.tensor.coding import coerce_classes, compared_labels, labels_as_text, series_kind

__all__ = ["TableSpec", "read_table", "text_labels", "classes_like", "comparable_labels"]


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


def read_table(path, columns=None, labels=()) -> pd.DataFrame:
    """Read a prediction table, only the named columns where the format allows.

    Parameters
    ----------
    path : str or path-like
        A ``.csv``, ``.tsv``, ``.parquet`` or ``.jsonl`` file.
    columns : list of str, optional
        Columns to read; all when None.
    labels : sequence of str, default ()
        Columns of labels: a CSV reader keeps their text as written
        (``01`` stays ``01``); typed formats keep their types.

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
    >>> _ = p.write_text("actual,predicted\\n01,1\\n")
    >>> read_table(p, labels=["actual", "predicted"]).iloc[0].tolist()
    ['01', '1']
    """
    path = local_or_bytes(path)
    if not path.is_file():
        raise file_error(path, "file not found")
    fmt = format_for(path, among=TABLE_FORMATS)
    try:
        df = fmt.frame(path, columns, labels=labels)
    except InvalidInputError:
        raise
    except Exception as exc:  # pandas and pyarrow raise their own error types
        raise fmt.read_error(path, exc) from None
    if len(df) == 0:
        raise file_error(path, "the table has no rows")
    return df


def _load_in_memory(path, spec: TableSpec = TableSpec()) -> xr.DataArray:
    """The whole table in memory, then :func:`~foldcorr.tensor.tally_frame`.

    The reference the streaming path must agree with (kept for the tests and
    for comparison in the benchmarks); :func:`load_tensor` does not use it.
    """
    path = local_or_bytes(path)
    df = read_table(path, columns=_wanted(spec), labels=[spec.truth, spec.pred])
    fold = _fold_column(path, df, spec)
    _require_columns(path, df, [spec.truth, spec.pred, fold, spec.weight])
    classes = None if spec.classes is None else classes_like(spec.classes, df[spec.truth])
    truth, pred = comparable_labels(df[spec.truth], df[spec.pred])
    frame = df.assign(**{spec.truth: truth, spec.pred: pred})
    try:
        t = tally_frame(frame, truth=spec.truth, pred=spec.pred,
                        by=None if fold is None else {FOLD: fold},
                        weight=spec.weight, classes=classes)
    except InvalidInputError as exc:
        raise file_error(path, str(exc)) from None
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
            names = format_for(path, among=TABLE_FORMATS).column_names(path)
            raise file_error(path, f"column {name!r} not found; the table has {names!r}")


def comparable_labels(truth: pd.Series, pred: pd.Series):
    """Truth and predicted labels in one type, by the rule of
    :func:`foldcorr.tensor.coding.compared_labels` (text when either is text).

    Examples
    --------
    >>> import warnings
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     t, p = comparable_labels(pd.Series([1, 2], name="a"), pd.Series(["01", "2"], name="p"))
    >>> t.tolist(), p.tolist()
    (['1', '2'], ['01', '2'])
    """
    kinds = (series_kind(truth), series_kind(pred))
    distinct = tuple(s.dropna().unique().tolist() for s in (truth, pred))
    kind, _, _ = compared_labels((truth.name, pred.name), kinds, distinct)
    if kind == "text":
        return text_labels(truth), text_labels(pred)
    return truth, pred


def text_labels(column: pd.Series) -> pd.Series:
    """A column of labels as text (missing values kept as None), by the rule of
    :func:`foldcorr.tensor.coding.labels_as_text`.

    Examples
    --------
    >>> text_labels(pd.Series([1.0, None, 3.5])).tolist()
    ['1.0', None, '3.5']
    """
    out = pd.Series([None] * len(column), index=column.index, dtype=object)
    known = column.notna().to_numpy()
    out[known] = labels_as_text(series_kind(column), column[known].tolist())
    return out


def classes_like(classes, column: pd.Series) -> tuple:
    """Class names given as text, in the type of a truth column (see
    :func:`foldcorr.tensor.coding.coerce_classes`).

    Examples
    --------
    >>> classes_like(["2", "10"], pd.Series([10, 2]))
    (2, 10)
    """
    return coerce_classes(classes, series_kind(column))

"""Streaming prediction tables: a dataset tallied file by file, batch by batch.

A dataset is a file, a folder of files or a glob (CSV, TSV, Parquet, JSON
Lines). The schemas of its files are checked first (:func:`plan_files`); then
each file is read in record batches (:mod:`foldcorr.sources.reading`), only the
columns needed, with an optional row filter (``where``) pushed down to the
Parquet reader, and every batch is coded and counted at once
(:class:`foldcorr.tensor.accumulator.StreamTally`), so memory is bounded by the
batch size and the size of the tensor, never by the number of rows.

The result equals the in-memory tally (:func:`foldcorr.tensor.tally_frame` on
the whole table read with pandas): classes sorted (unless ``classes`` is
given), the fold coordinate sorted, the same provenance and the same error
messages naming file, column and row. To get there, labels are coded as they
come (codes stay stable while new labels appear) and the column types are
settled once at the end, the way pandas would settle them for the whole
column (see :mod:`foldcorr.tensor.coding`).
"""

from __future__ import annotations

import contextlib
import sys
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from foldcorr._version import __version__
from foldcorr.errors import InvalidInputError, OptionError
from foldcorr.sources.counts import as_counts, whole_counts
from foldcorr.sources.formats import TABLE_FORMATS, format_for
from foldcorr.sources.partitions import excluded, typed_partitions
from foldcorr.sources.problems import UnreadableFile, file_error
from foldcorr.sources.reading import (
    BATCH_ROWS,
    Progress,
    checked_schema,
    read_batches,
    require_columns,
    resolve_paths,
)
from foldcorr.sources.where import ExpressionWhere, as_where
from foldcorr.tensor import (
    ACTUAL,
    FOLD,
    PREDICTED,
    bad_weight_message,
    missing_label_message,
    unknown_label_message,
)
from foldcorr.tensor.accumulator import BatchCheck, StreamTally
from foldcorr.tensor.coding import arrow_kind, label_key

if TYPE_CHECKING:
    import os
    from collections.abc import Sequence

    from numpy.typing import ArrayLike

    from foldcorr.sources.where import Where

__all__ = ["StreamResult", "SkippedFiles", "FilePlan", "plan_files", "tally_files",
           "finish_tally", "raise_checks", "stream_tensor", "counted_plan"]


@dataclass(frozen=True)
class StreamResult:
    """A streamed tensor and what was read to make it.

    Attributes
    ----------
    tensor : xarray.DataArray
        The confusion tensor.
    files : tuple of str
        Files read.
    skipped : tuple of (str, str)
        Files skipped (``skip_bad_files``) with the reason.
    rows : int
        Rows counted (after ``where``).
    """

    tensor: object
    files: tuple
    skipped: tuple
    rows: int

    @property
    def warnings(self) -> tuple:
        """One plain sentence per skipped file."""
        return tuple(f"skipped unreadable file {name}: {why}" for name, why in self.skipped)


@dataclass(frozen=True)
class SkippedFiles:
    """Files a run left out (``skip_bad_files``), as a section of an evaluation.

    Attributes
    ----------
    files : tuple of str
        Names of the skipped files.
    """

    files: tuple

    @classmethod
    def of(cls, tensor) -> SkippedFiles:
        """The skipped files recorded in a tensor's ``attrs``.

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> t = confusion_tensor([[1]], ["a"], attrs={"skipped_files": "b.parquet"})
        >>> SkippedFiles.of(t).warnings
        ('skipped unreadable file b.parquet; its rows are not counted',)
        """
        return cls(tuple(filter(None, str(tensor.attrs.get("skipped_files", "")).split(","))))

    @property
    def warnings(self) -> tuple:
        """One sentence per skipped file."""
        return tuple(f"skipped unreadable file {name}; its rows are not counted"
                     for name in self.files)


def stream_tensor(path: str | os.PathLike[str], *, truth: str = ACTUAL, pred: str = PREDICTED,
                  fold: str | None = "auto", weight: str | None = None,
                  classes: ArrayLike | None = None, where: str | Where | None = None,
                  skip_bad_files: bool = False, progress: bool | None = None,
                  batch_rows: int = BATCH_ROWS, count: str | None = None,
                  na_values: Sequence[str] = ()) -> StreamResult:
    """Tally a dataset of prediction tables into a tensor, batch by batch.

    Parameters
    ----------
    path : str or path-like
        A file, a folder or a glob (see :func:`resolve_paths`).
    truth, pred : str
        Columns of actual and predicted labels.
    fold : str or None, default "auto"
        Fold column; ``"auto"`` uses ``fold`` when the first file has it.
    weight : str, optional
        Column of sample weights.
    classes : sequence, optional
        Fixed class order; labels outside it are an error.
    where : str or Where, optional
        Row filter: text (see :func:`~foldcorr.sources.where.parse_where`) or a
        ``pyarrow.compute.Expression``; pushed down to Parquet.
    skip_bad_files : bool, default False
        Skip files that cannot be read or lack a needed column, and report
        them in :attr:`StreamResult.skipped`, instead of stopping.
    progress : bool, optional
        Show a progress bar on stderr; default: only when stderr is a terminal.
    batch_rows : int
        Rows per record batch.
    count : str, optional
        Column of whole counts: each row stands for that many samples (see
        :mod:`foldcorr.sources.counts`); the tensor stays int64.

    Returns
    -------
    StreamResult

    Raises
    ------
    InvalidInputError
        Naming file, column and row: no file matches, a file cannot be read,
        a column is missing or has another type than in the first file, a
        label is missing or outside ``classes``, a weight is negative.

    Notes
    -----
    Memory holds one record batch and the count array
    (folds x K_actual x K_predicted), whatever the number of rows.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "part1.csv").write_text("actual,predicted,fold\\na,a,1\\nb,a,1\\n")
    >>> _ = (d / "part2.csv").write_text("actual,predicted,fold\\nc,c,2\\nb,b,2\\n")
    >>> r = stream_tensor(d)
    >>> r.tensor.dims, r.tensor.coords["actual"].values.tolist(), r.rows
    (('fold', 'actual', 'predicted'), ['a', 'b', 'c'], 4)
    """
    files = resolve_paths(path)
    if truth == pred:
        raise file_error(files[0] if len(files) == 1 else Path(str(path)),
                         f"truth and pred name the same column {truth!r}")
    where = as_where(where)
    show = sys.stderr.isatty() if progress is None else progress
    bar = Progress(len(files)) if show else None
    try:
        return _stream(path, files, truth, pred, fold, weight, classes, where,
                       skip_bad_files, batch_rows, bar, count, na_values)
    finally:
        if bar is not None:
            bar.close()


@dataclass(frozen=True)
class FilePlan:
    """What the schemas of a dataset's files say, read before any row (see :func:`plan_files`).

    Attributes
    ----------
    files : tuple of (pathlib.Path, FileFormat)
        Files to read, with their format.
    skipped : tuple of (str, str)
        Files left out, and why.
    truth, pred, fold, weight : str or None
        Columns read (``fold`` resolved from ``"auto"``).
    text : bool
        The labels are CSV text (their types settled at the end).
    where : Where or None
        Row filter.
    source : str
        Name of the source in the tensor's provenance.
    single : bool
        The dataset is one file.
    partitions : dict
        File -> {partition column: ``pyarrow.Scalar``} read from its
        ``key=value`` folders (hive layout).
    count : str or None
        Column of whole counts (rows already aggregated), read as ``weight``.
    """

    files: tuple
    skipped: tuple
    truth: str
    pred: str
    fold: str | None
    weight: str | None
    text: bool
    where: object
    source: str
    single: bool
    partitions: dict = field(default_factory=dict)
    count: str | None = None
    na_values: tuple = ()

    def columns(self) -> list[str]:
        """Columns to read: labels, fold, weight and the filter's columns."""
        cols = [c for c in dict.fromkeys([self.truth, self.pred, self.fold, self.weight]) if c]
        if self.where is not None:
            cols += [c for c in self.where.columns if c not in cols]
        return cols

    def text_columns(self) -> list[str]:
        """Columns the CSV reader reads as text: labels, fold and the filter's columns.

        Their types are then settled over all their values (labels) or
        compared as :meth:`Where.expression` says (filter columns), never
        guessed from the first block. The columns of an Arrow expression
        keep the types the reader gives them.
        """
        cols = [self.truth, self.pred] + ([self.fold] if self.fold else [])
        cols += [self.count] if self.count else []
        if self.where is not None and not isinstance(self.where, ExpressionWhere):
            cols += [c for c in self.where.columns if c not in cols and c != self.weight]
        return cols

    def new_tally(self) -> StreamTally:
        """An empty tally of the plan's columns."""
        return StreamTally(self.truth, self.pred, self.fold, self.weight, text=self.text,
                           na_values=self.na_values)


def plan_files(path, files, truth, pred, fold, weight, where, skip_bad_files) -> FilePlan:
    """Check every file's columns (header or footer only) against the first readable one.

    Parameters
    ----------
    path : str or path-like
        The dataset as given (its name is the source of a dataset of several files).
    files : list of pathlib.Path
        Its files (see :func:`~foldcorr.sources.reading.resolve_paths`).
    truth, pred, fold, weight, where, skip_bad_files
        As in :func:`stream_tensor` (``where`` parsed).

    Returns
    -------
    FilePlan

    Raises
    ------
    InvalidInputError
        When a file must not be skipped, or no file is readable.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted,fold\\na,b,1\\n")
    >>> plan = plan_files(p, [p], "actual", "predicted", "auto", None, None, False)
    >>> plan.fold, plan.text, plan.columns()
    ('fold', True, ['actual', 'predicted', 'fold'])
    """
    first: dict = {}
    chosen, skipped, pruned = [], [], 0
    fold_col, text = None, False
    partitions = typed_partitions(path, files, _text_guess(files))
    for f in files:
        try:
            fmt = format_for(f, among=TABLE_FORMATS)
            schema = checked_schema(f, fmt, truth, pred, fold, weight, first, where,
                                    partitions.get(f))
            if not first:
                if isinstance(where, ExpressionWhere) and not where.columns:
                    where = where.bind(schema)
                fold_col = (FOLD if FOLD in schema.names else None) if fold == "auto" else fold
                text = fmt.text
                first.update({c: arrow_kind(schema.field(c).type) for c in
                              [truth, pred, fold_col, weight] if c})
                first["__file__"], first["__text__"] = f.name, text
            elif fmt.text != text:
                raise UnreadableFile(file_error(f, "CSV and typed files (Parquet, JSON Lines) "
                                                        "cannot be mixed in one dataset; the first "
                                                        f"file is {first['__file__']}"))
            require_columns(f, schema, [fold_col])
            if excluded(where, partitions.get(f)):
                pruned += 1
                continue
            chosen.append((f, fmt))
        except UnreadableFile as exc:
            if not skip_bad_files:
                raise exc.args[0] from None
            skipped.append(_skip_entry(exc))
    if not chosen and pruned:
        raise file_error(Path(str(path)), "no rows pass the filter")
    if not chosen:
        raise InvalidInputError(f"no readable file among {len(files)}; first problem: "
                                f"{skipped[0][0]}: {skipped[0][1]}")
    single = len(files) == 1
    return FilePlan(files=tuple(chosen), skipped=tuple(skipped), truth=truth, pred=pred,
                    fold=fold_col, weight=weight, text=text, where=where,
                    source=files[0].name if single else Path(str(path)).name, single=single,
                    partitions=partitions)


def _text_guess(files) -> bool:
    try:
        return format_for(files[0], among=TABLE_FORMATS).text
    except InvalidInputError:
        return False


def _skip_entry(exc: UnreadableFile) -> tuple[str, str]:
    name, _, why = str(exc.args[0]).partition(": ")
    return name, why


def counted_plan(plan: FilePlan, weight, count, na_values=()) -> FilePlan:
    """The plan reading ``count`` as whole counts (weights and counts are exclusive), and
    ``na_values`` as missing labels.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted,n\\na,b,2\\n")
    >>> plan = plan_files(p, [p], "actual", "predicted", "auto", "n", None, False)
    >>> counted_plan(plan, None, "n").count
    'n'
    """
    plan = replace(plan, na_values=tuple(na_values)) if na_values else plan
    if count is None:
        return plan
    if weight is not None:
        raise OptionError(f"`weight` and `count` cannot both be given; got weight {weight!r} "
                          f"and count {count!r}")
    return replace(plan, count=count)


def _tally_file(plan: FilePlan, f: Path, fmt, classes, batch_rows: int,
                bar=None) -> StreamTally:
    """Tally one file on its own; raise UnreadableFile when it cannot be read."""
    return _count_file_into(plan.new_tally(), plan, f, fmt, classes, batch_rows, bar)


def _count_file_into(acc: StreamTally, plan: FilePlan, f: Path, fmt, classes,
                     batch_rows: int, bar=None) -> StreamTally:
    """Add every batch of one file to ``acc``, then run the file's checks; return ``acc``."""
    check = BatchCheck()
    # closing: on an error the read-ahead thread stops now, not when the traceback goes
    with contextlib.closing(read_batches(f, fmt, plan.columns(), plan.text_columns(), plan.where,
                                         batch_rows, plan.partitions.get(f))) as batches:
        offset = 0
        for batch in batches:
            try:
                if plan.count:
                    offset += batch.num_rows
                    batch = whole_counts(batch, plan.count, offset - batch.num_rows)
                acc.add(batch, check)
            except InvalidInputError as exc:
                raise file_error(f, str(exc)) from None
            if bar is not None:
                bar.rows(batch.num_rows)
    raise_checks(f, check, acc, classes)
    return acc


def finish_tally(plan: FilePlan, acc: StreamTally, used, skipped, classes,
                 batch_rows) -> StreamResult:
    """Settle labels and provenance into the result; the same for every engine.

    Parameters
    ----------
    plan : FilePlan
        The dataset's plan.
    acc : StreamTally
        The tally of every file read.
    used : list of pathlib.Path
        Files counted, in order.
    skipped : list of (str, str)
        Files skipped and why.
    classes : sequence or None
        Fixed class order.
    batch_rows : int
        Rows per batch (for the second pass that finds a label outside ``classes``).

    Returns
    -------
    StreamResult

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted\\na,b\\nb,b\\n")
    >>> plan = plan_files(p, [p], "actual", "predicted", "auto", None, None, False)
    >>> acc, used, skipped = tally_files(plan, plan.files, None, False, 1000)
    >>> finish_tally(plan, acc, used, skipped, None, 1000).tensor.values.tolist()
    [[0, 1], [0, 1]]
    """
    name = plan.files[0][0] if plan.single else Path(plan.source)
    if acc.rows == 0:
        raise file_error(name, "no rows pass the filter" if plan.where is not None
                         else "the table has no rows")
    attrs = {"truth_column": plan.truth, "pred_column": plan.pred}
    if plan.fold:
        attrs["by_columns"] = f"{FOLD}={plan.fold}"
    if plan.weight and not plan.count:
        attrs["weight_column"] = plan.weight
    if plan.count:
        attrs["count_column"] = plan.count
    attrs.update({"n_rows": int(acc.rows), "foldcorr_version": __version__})
    attrs["source"] = plan.source
    if plan.fold:
        attrs["fold_column"] = plan.fold
    if not plan.single:
        attrs["n_files"] = len(used)
    if plan.where is not None:
        attrs["where"] = plan.where.text
    if skipped:
        attrs["skipped_files"] = ",".join(n for n, _ in skipped)

    def unknown(role, bad_codes, labels):
        _locate_unknown(acc, used, role, bad_codes, labels, plan.where, batch_rows,
                        plan.partitions)

    try:
        tensor = acc.tensor(classes=classes, attrs=attrs, unknown=unknown)
    except InvalidInputError as exc:
        if str(exc).startswith(tuple(f"{f.name}:" for f, _ in plan.files)):
            raise
        raise file_error(name, str(exc)) from None
    if plan.count:
        tensor = as_counts(tensor, plan.count)
    return StreamResult(tensor=tensor, files=tuple(f.name for f in used),
                        skipped=tuple(skipped), rows=int(acc.rows))


def _stream(path, files, truth, pred, fold, weight, classes, where, skip_bad_files,
            batch_rows, bar, count=None, na_values=()) -> StreamResult:
    plan = counted_plan(plan_files(path, files, truth, pred, fold, weight or count, where,
                                   skip_bad_files), weight, count, na_values)
    if bar is not None:
        bar.advance(len(plan.skipped))
    acc, used, skipped = tally_files(plan, plan.files, classes, skip_bad_files, batch_rows, bar)
    skipped = list(plan.skipped) + skipped
    if acc is None:
        raise InvalidInputError(f"no readable file among {len(files)}; first problem: "
                                f"{skipped[0][0]}: {skipped[0][1]}")
    return finish_tally(plan, acc, used, skipped, classes, batch_rows)


def tally_files(plan: FilePlan, files, classes, skip_bad_files: bool, batch_rows: int, bar=None):
    """Tally (file, format) pairs in order; return the tally, files used and files skipped.

    When files may be skipped, each is counted on its own first and added only
    once it was read to the end, so a file that fails half-way adds nothing.
    The tally is None when every file was skipped. See :func:`finish_tally`
    for an example.
    """
    acc, used, skipped = None, [], []
    for f, fmt in files:
        try:
            if acc is None or skip_bad_files:
                part = _tally_file(plan, f, fmt, classes, batch_rows, bar)
                acc = part if acc is None else acc.merge(part)
            else:
                # Straight into the running tally: no copy of the count array per file.
                _count_file_into(acc, plan, f, fmt, classes, batch_rows, bar)
            used.append(f)
        except UnreadableFile as exc:
            if not skip_bad_files:
                raise exc.args[0] from None
            skipped.append(_skip_entry(exc))
        if bar is not None:
            bar.advance(1)
    return acc, used, skipped


def raise_checks(f, check: BatchCheck, acc: StreamTally, classes) -> None:
    """Raise the first problem found in one file, in the order of the in-memory checks.

    Examples
    --------
    >>> import pyarrow as pa
    >>> acc, check = StreamTally(), BatchCheck()
    >>> acc.add(pa.record_batch({"actual": ["a", None], "predicted": ["a", "a"]}), check)
    >>> raise_checks("p.csv", check, acc, None)
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidInputError: p.csv: column 'actual' row 2: ...
    """
    label_roles = [("truth", acc.truth), ("pred", acc.pred)]
    if classes is None:
        missing = sum(check.nulls.get(r, 0) for r, _ in label_roles)
        if missing:
            role, name = next((r, n) for r, n in label_roles if r in check.first_null)
            raise file_error(f, missing_label_message(name, check.first_null[role], missing))
    if "fold" in check.first_null:
        raise file_error(f, f"column {FOLD!r} row {check.first_null['fold'] + 1}: missing value")
    if check.bad_weight is not None:
        row, value = check.bad_weight
        raise file_error(f, bad_weight_message(row, value))


def _locate_unknown(acc, files, role, bad_codes, labels, where, batch_rows,
                    partitions) -> None:
    """Find the first row holding a label outside ``classes`` (a second, error-only pass).

    As in the in-memory check, the truth column of a file is searched before
    its predictions; the count is of the rows of that column in that file.
    """
    lab = acc.labels()
    allowed = {label_key(v) for v in labels}
    for f in files:
        fmt = format_for(f, among=TABLE_FORMATS)
        for which in ("truth", "pred"):
            codes, _, values = lab[which]
            shown = {int(c): v for c, v in zip(codes, values)}
            bad = np.array([c for c, v in shown.items() if label_key(v) not in allowed],
                           dtype=np.int64)
            name = acc.truth if which == "truth" else acc.pred
            extra = [] if where is None else [c for c in where.columns if c != name]
            first, count, rows = None, 0, 0
            for batch in read_batches(f, fmt, [name, *extra], [name, *extra], where, batch_rows,
                                      partitions.get(f)):
                c, nulls = acc.coders[which].encode(batch.column(name))
                hit = np.isin(c, bad)
                if nulls is not None:
                    hit |= nulls
                if hit.any():
                    if first is None:
                        i = int(np.flatnonzero(hit)[0])
                        first = (rows + i, shown.get(int(c[i]), float("nan")))
                    count += int(hit.sum())
                rows += batch.num_rows
            if first is not None:
                raise file_error(f, unknown_label_message(name, first[0], first[1], count, labels))

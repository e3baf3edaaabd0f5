"""Reading prediction tables: the files of a dataset, their schemas and their batches.

:func:`resolve_paths` finds the files of a dataset (a file, a folder or a
glob); :func:`checked_schema` reads a file's columns before any row;
:func:`read_batches` yields its record batches, read ahead by a background
thread (:func:`prefetch`), and turns a read error into an
:class:`~foldcorr.sources.problems.UnreadableFile` naming the file, which a
dataset may skip. :class:`Progress` draws rows and files done on stderr.
"""

from __future__ import annotations

import contextlib
import glob as _glob
import sys
from pathlib import Path

from foldcorr.errors import FoldcorrError, InvalidInputError
from foldcorr.sources.formats import TABLE_SUFFIXES
from foldcorr.sources.locations import STDIN, BytesFile, is_url, list_url, read_stdin
from foldcorr.sources.memory import is_memory_table, memory_table
from foldcorr.sources.partitions import conjuncts, with_partitions
from foldcorr.sources.problems import UnreadableFile, file_error, first_line
from foldcorr.tensor.coding import arrow_kind

__all__ = ["BATCH_ROWS", "PREFETCH", "resolve_paths", "prefetch", "read_batches",
           "checked_schema", "require_columns", "Progress"]

#: Rows per record batch asked of the readers.
BATCH_ROWS = 1 << 20
#: Record batches a background thread reads ahead of the counting (0: none).
PREFETCH = 2


def resolve_paths(path) -> list:
    """The files of a dataset: one file, every table file in a folder, or a glob.

    Parameters
    ----------
    path : str or path-like
        A file; a folder (its table files, searched recursively, in sorted
        order; hidden files are left out); or a glob pattern such as
        ``"runs/part-*.parquet"`` (``**`` matches folders recursively); any
        of these as a URL (see :func:`foldcorr.sources.locations.list_url`).

    Returns
    -------
    list of pathlib.Path or RemoteFile
        The files, sorted.

    Raises
    ------
    InvalidInputError
        When nothing matches, or a folder holds no table file.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> for name in ("b.csv", "a.csv", "notes.txt"):
    ...     _ = (d / name).write_text("actual,predicted\\nx,x\\n")
    >>> [p.name for p in resolve_paths(d)]
    ['a.csv', 'b.csv']
    >>> [p.name for p in resolve_paths(d / "*.csv")]
    ['a.csv', 'b.csv']
    """
    if is_memory_table(path):
        return [memory_table(path)]
    if isinstance(path, BytesFile):
        return [path]
    text = str(path)
    if text == STDIN:
        return [read_stdin()]
    if is_url(text):
        return list_url(text, TABLE_SUFFIXES)
    p = Path(path)
    if p.is_file():
        return [p]
    if p.is_dir():
        files = sorted(f for f in p.rglob("*") if f.is_file()
                       and f.suffix.lower() in TABLE_SUFFIXES
                       and not any(part.startswith((".", "_")) for part in f.relative_to(p).parts))
        if not files:
            known = ", ".join(sorted(TABLE_SUFFIXES))
            raise file_error(p, f"the folder holds no table file (endings {known})")
        return files
    if _glob.has_magic(text):
        files = sorted(Path(f) for f in _glob.glob(text, recursive=True) if Path(f).is_file())
        if not files:
            raise InvalidInputError(f"the pattern {text!r} matches no file")
        return files
    raise file_error(p, "file not found")


def prefetch(items, depth: int):
    """The items of an iterator, read ahead by a background thread into a bounded queue.

    The readers decode while the caller counts (numpy and pyarrow release the
    GIL), and at most ``depth`` items wait, so memory stays bounded. An error
    of the iterator is raised here, in the caller's thread, in its turn.

    Examples
    --------
    >>> list(prefetch(iter(range(5)), 2)), list(prefetch(iter("ab"), 0))
    ([0, 1, 2, 3, 4], ['a', 'b'])
    """
    import queue
    import threading

    if depth <= 0:
        yield from items
        return
    q: queue.Queue = queue.Queue(maxsize=depth)
    stop = threading.Event()
    end = object()

    def put(entry) -> bool:
        while not stop.is_set():
            try:
                q.put(entry, timeout=0.05)
                return True
            except queue.Full:
                continue
        return False

    def produce():
        try:
            for item in items:
                if not put((item, None)):
                    return
            put((end, None))
        except BaseException as exc:  # handed to the caller, raised there
            put((end, exc))

    worker = threading.Thread(target=produce, name="foldcorr-read-ahead", daemon=True)
    worker.start()
    try:
        while True:
            item, exc = q.get()
            if item is end:
                if exc is not None:
                    raise exc
                return
            yield item
    finally:
        stop.set()
        worker.join()


def read_batches(f, fmt, columns, text_cols, where, batch_rows, partitions=None):
    """Record batches of one file, read ahead; read errors become skippable errors naming it.

    Partition columns (``key=value`` folders) are added to every batch as
    constants; the parts of the filter that name none of them are pushed down
    to the reader, and the whole filter is applied once those columns are
    added.

    Parameters
    ----------
    f : pathlib.Path
        The file.
    fmt : FileFormat
        Its format (see :func:`foldcorr.sources.formats.format_for`).
    columns, text_cols : list of str
        Columns to read, and those read as text.
    where : Where or None
        Row filter.
    batch_rows : int
        Rows per batch.
    partitions : dict, optional
        Partition column -> ``pyarrow.Scalar`` of this file.

    Yields
    ------
    pyarrow.RecordBatch or pyarrow.Table

    Raises
    ------
    UnreadableFile
        When the file cannot be read as its format.
    InvalidInputError
        When its data are wrong (weights that are not numbers, a filter that
        orders text against a number).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from foldcorr.sources.formats import format_for
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted\\na,b\\n")
    >>> [b.num_rows for b in read_batches(p, format_for(p), ["actual"], ["actual"], None, 10)]
    [1]
    """
    parts = partitions or {}
    inner = conjuncts(where, parts, naming=False) if parts else where
    read = fmt.batches(f, [c for c in columns if c not in parts],
                       [c for c in text_cols if c not in parts], inner, batch_rows)
    with contextlib.closing(prefetch(read, PREFETCH)) as it:
        for batch in _checked_batches(f, fmt, it, where):
            if parts:
                batch = with_partitions(batch, parts, columns, where if inner is not where else None)
            yield batch


def _checked_batches(f, fmt, it, where):
    while True:
        try:
            batch = next(it)
        except StopIteration:
            return
        except FoldcorrError:
            raise
        except Exception as exc:  # pyarrow raises its own error types
            text = first_line(exc)
            if "conversion error to double" in text:  # data, not damage: never skipped
                raise file_error(f, f"weights must be numbers ({text})") from None
            if where is not None and text.startswith("Failed to parse string"):
                raise file_error(f, f"`where` {where.text!r} orders a column against a number, "
                                    f"but the column holds text that is not a number "
                                    f"({text})") from None
            raise UnreadableFile(fmt.read_error(f, exc)) from None
        yield batch


def checked_schema(f, fmt, truth, pred, fold, weight, first_types, where, partitions=None):
    """A file's schema, checked before any row is read.

    The named columns must be there, the filter's columns too, and (unless
    the files are CSV text) each column of ``first_types`` must hold the same
    kind of values as in the first file.

    Parameters
    ----------
    f : pathlib.Path
        The file.
    fmt : FileFormat
        Its format.
    truth, pred, fold, weight : str or None
        Columns the tally reads (``fold`` ``"auto"``: not required).
    first_types : dict
        Column -> kind in the first file, with ``"__file__"`` (its name) and
        ``"__text__"`` (whether it is CSV text); empty for the first file.
    where : Where or None
        Row filter.
    partitions : dict, optional
        Partition column -> ``pyarrow.Scalar``, added to the schema.

    Returns
    -------
    pyarrow.Schema

    Raises
    ------
    UnreadableFile
        When the file cannot be read, lacks a column or a column's kind differs.
    InvalidInputError
        When the filter names a column the file does not have.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from foldcorr.sources.formats import format_for
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted\\na,b\\n")
    >>> checked_schema(p, format_for(p), "actual", "predicted", "auto", None, {}, None).names
    ['actual', 'predicted']
    """
    import pyarrow as pa

    try:
        schema = fmt.schema(f)
    except UnreadableFile:
        raise
    except Exception as exc:  # pyarrow raises its own error types
        raise UnreadableFile(fmt.read_error(f, exc)) from None
    for col, value in (partitions or {}).items():
        if col not in schema.names:
            schema = schema.append(pa.field(col, value.type))
    names = [c for c in (truth, pred, weight) if c]
    if fold not in (None, "auto"):
        names.append(fold)
    require_columns(f, schema, names)
    for col in (truth, pred, None if fold == "auto" else fold):
        if col and pa.types.is_nested(schema.field(col).type):
            raise file_error(f, f"column {col!r} holds {schema.field(col).type} values; labels "
                                f"must be text, numbers or booleans")
    if where is not None:  # a filter naming a missing column is the caller's, never skipped
        try:
            where.check_columns(schema.names)
        except InvalidInputError as exc:
            raise file_error(f, str(exc)) from None
    if first_types:
        for col, kind in first_types.items():
            if col.startswith("__") or col not in schema.names:
                continue
            here = arrow_kind(schema.field(col).type)
            if not first_types["__text__"] and here != kind and {here, kind} - {"null"}:
                raise UnreadableFile(file_error(f, f"column {col!r} holds {here} values here "
                                                   f"but {kind} values in "
                                                   f"{first_types['__file__']}"))
    return schema


def require_columns(f, schema, names) -> None:
    """Raise :class:`UnreadableFile` naming the first of ``names`` the schema lacks or repeats.

    Examples
    --------
    >>> import pyarrow as pa
    >>> require_columns("p.csv", pa.schema([("actual", pa.string())]), ["actual", None, "w"])
    Traceback (most recent call last):
    ...
    foldcorr.sources.problems.UnreadableFile: p.csv: column 'w' not found; the table has ['actual']
    >>> require_columns("p.csv", pa.schema([("a", pa.string()), ("a", pa.string())]), ["a"])
    Traceback (most recent call last):
    ...
    foldcorr.sources.problems.UnreadableFile: p.csv: column 'a' appears 2 times; column names must be unique
    """
    for name in names:
        if name is not None and name not in schema.names:
            raise UnreadableFile(file_error(f, f"column {name!r} not found; the table has "
                                               f"{list(schema.names)!r}"))
        if name is not None and list(schema.names).count(name) > 1:
            raise UnreadableFile(file_error(f, f"column {name!r} appears "
                                               f"{list(schema.names).count(name)} times; "
                                               f"column names must be unique"))


class Progress:
    """Rows and files done, drawn on stderr with rich.progress (transient).

    Parameters
    ----------
    n_files : int
        Files to read.
    """

    def __init__(self, n_files: int):
        from rich.console import Console
        from rich.progress import BarColumn, MofNCompleteColumn, TextColumn, TimeElapsedColumn
        from rich.progress import Progress as Bar

        self.progress = Bar(TextColumn("files"), BarColumn(), MofNCompleteColumn(),
                                 TextColumn("{task.fields[rows]:,} rows"), TimeElapsedColumn(),
                                 console=Console(file=sys.stderr), transient=True)
        self.progress.start()
        self.task = self.progress.add_task("tally", total=n_files, rows=0)
        self.n = 0

    def rows(self, n: int) -> None:
        self.n += n
        self.progress.update(self.task, rows=self.n)

    def advance(self, files: int) -> None:
        self.progress.advance(self.task, files)

    def close(self) -> None:
        self.progress.stop()

"""File formats: one object per kind of file, listed once in :data:`FORMATS`.

Each format knows its file endings and says whether it can open a path
(:meth:`FileFormat.can_open`); :func:`format_for` asks them in turn. Formats of
prediction tables (one row per sample: CSV, Parquet, JSON Lines) read a
file's schema cheaply, its record batches for the stream path and a whole
frame for the pandas path; formats of counts already tallied (a counts
matrix, a saved evaluation in NetCDF) read a tensor. A new format is one class
here and one line in :data:`FORMATS`.
"""

from __future__ import annotations

import io
import re
from pathlib import Path

from foldcorr.errors import InvalidInputError
from foldcorr.sources.locations import BytesFile, RemoteFile, input_of, open_dataset, size_of
from foldcorr.sources.matrix import read_matrix
from foldcorr.sources.memory import MemoryTable
from foldcorr.sources.problems import UnreadableFile, file_error, first_line
from foldcorr.sources.saved import SAVED_SUFFIXES, check_saved_options, is_saved_path, load_saved
from foldcorr.tensor.coding import arrow_kind

__all__ = ["FileFormat", "CsvFormat", "ParquetFormat", "JsonLinesFormat", "CountsMatrixFormat",
           "NetcdfFormat", "MemoryFormat", "FORMATS", "TABLE_FORMATS", "TABLE_SUFFIXES", "format_for",
           "format_of", "BLOCK_BYTES", "BATCH_READAHEAD", "NA_VALUES",
           "JSON_MAX_DEPTH", "check_json_depth"]

#: Bytes per CSV / JSON Lines block.
BLOCK_BYTES = 1 << 24
#: Record batches the Parquet reader decodes ahead, in its own threads.
BATCH_READAHEAD = 1
#: Cell texts a CSV reader takes as missing: only the empty cell (``NA`` can be a class).
NA_VALUES = ("",)
#: Deepest nesting of arrays and objects a JSON Lines line may have (labels are scalars).
JSON_MAX_DEPTH = 64


class FileFormat:
    """One kind of file: its endings and how to read it.

    Attributes
    ----------
    name : str
        The format's name in messages (``"cannot read as csv"``).
    suffixes : tuple of str
        File endings (lower case) the format answers for.
    rows : bool
        Whether the file holds one row per sample (a prediction table) rather
        than counts already tallied.
    text : bool
        Whether its labels arrive as text whose type is settled over the
        whole column (CSV).
    title : str
        What a file of counts is, in messages (``"matrix"``).
    """

    name = ""
    suffixes: tuple = ()
    rows = True
    text = False
    title = "table"

    def can_open(self, path, *, matrix: bool = False) -> bool:
        """Whether this format reads ``path`` (``matrix``: a counts matrix is asked for)."""
        return Path(str(path)).suffix.lower() in self.suffixes and not matrix

    def name_of(self, path) -> str:
        """The format's name for ``path`` in messages."""
        return self.name

    def schema(self, path):
        """The Arrow schema of a table, cheaply (the header or the footer only)."""
        raise NotImplementedError

    def batches(self, path, columns, text_columns, where, batch_rows: int):
        """Record batches of ``columns`` (``text_columns`` read as text), filtered by ``where``.

        A generator: the file is opened at the first batch asked for, so that
        every read error surfaces while iterating.
        """
        raise NotImplementedError

    def frame(self, path, columns=None, labels=()):
        """The whole table (only ``columns`` where the format allows) as a pandas DataFrame.

        ``labels`` names label columns, which a text format keeps as text.
        """
        raise NotImplementedError

    def column_names(self, path) -> list:
        """The table's column names, as the pandas path reads them."""
        return list(self.schema(path).names)

    def tensor(self, path):
        """The confusion tensor of a file of counts."""
        raise NotImplementedError

    def check_options(self, path, spec, **options) -> None:
        """Refuse options that cannot apply to a file of this format (none by default)."""

    def bad_line(self, path) -> int | None:
        """The 1-based number of the first line a parser refuses, when the format can tell."""
        return None

    def read_error(self, path, exc: BaseException):
        """The error of a file this format cannot read: the parser's first line, with the
        1-based number of the bad line when :meth:`bad_line` finds it.

        Examples
        --------
        >>> import tempfile, pathlib
        >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.jsonl"
        >>> _ = p.write_text('{"actual": "a"}\\n{"actual": \\n')
        >>> str(JsonLinesFormat().read_error(p, ValueError("JSON parse error: Invalid value. in row 1")))
        'p.jsonl: cannot read as jsonl: line 2: JSON parse error: Invalid value.'
        """
        text = re.sub(r"\s+in row \d+$", "", first_line(exc))  # a row count of its own block
        try:
            line = self.bad_line(path)
        except Exception:  # the file cannot even be read line by line: the parser's words
            line = None
        where = "" if line is None else f"line {line}: "
        return file_error(path, f"cannot read as {self.name_of(path)}: {where}{text}")

    def __repr__(self) -> str:
        return f"{type(self).__name__}()"


class _AllText(dict):
    """column_types for pyarrow's CSV reader: every column it asks about is text."""

    def __missing__(self, key):
        import pyarrow as pa

        return pa.string()

    def __contains__(self, key):
        return True


class CsvFormat(FileFormat):
    """Comma- (``.csv``) or tab-separated (``.tsv``) prediction tables; labels read as text."""

    name = "csv"
    suffixes = (".csv", ".tsv")
    text = True

    def name_of(self, path) -> str:
        return "tsv" if Path(str(path)).suffix.lower() == ".tsv" else "csv"

    def _sep(self, path) -> str:
        return "\t" if self.name_of(path) == "tsv" else ","

    def _parse_options(self, path):
        import pyarrow.csv as pcsv

        return pcsv.ParseOptions(delimiter=self._sep(path), newlines_in_values=True)

    def schema(self, path):
        import pyarrow.csv as pcsv

        if size_of(path) == 0:
            raise UnreadableFile(file_error(path, "the file is empty"))
        reader = pcsv.open_csv(input_of(path), read_options=pcsv.ReadOptions(block_size=1 << 16),
                               parse_options=self._parse_options(path),
                               convert_options=pcsv.ConvertOptions(
                                   column_types=_AllText(), strings_can_be_null=True,
                                   null_values=list(NA_VALUES)))
        return reader.schema

    def batches(self, path, columns, text_columns, where, batch_rows: int):
        import pyarrow as pa
        import pyarrow.csv as pcsv
        import pyarrow.dataset as ds

        # Through pyarrow.dataset, as Parquet: the filter is pushed down to the scan. Every
        # column has a fixed type (text unless read as a number), so no column's type is
        # guessed from the first block.
        def scan():
            types = {name: pa.string() for name in self.schema(path).names}
            types.update({c: pa.float64() for c in columns if c not in text_columns})
            dataset = open_dataset(path, ds.CsvFileFormat(
                read_options=pcsv.ReadOptions(block_size=BLOCK_BYTES),
                parse_options=self._parse_options(path),
                convert_options=pcsv.ConvertOptions(column_types=types, strings_can_be_null=True,
                                                    null_values=list(NA_VALUES))))
            expr = None if where is None else where.expression(dataset.schema)
            yield from dataset.to_batches(columns=columns, filter=expr, batch_size=batch_rows,
                                          batch_readahead=BATCH_READAHEAD, fragment_readahead=1)

        yield from scan()

    def frame(self, path, columns=None, labels=()):
        import pandas as pd

        if size_of(path) == 0:
            raise file_error(path, "the file is empty")
        # every column is parsed (pandas' usecols would drop the extra cells of a bad row)
        df = pd.read_csv(input_of(path), sep=self._sep(path), dtype={c: object for c in labels},
                         encoding="utf-8-sig", keep_default_na=False, na_values=list(NA_VALUES))
        return df if columns is None else df[[c for c in df.columns if c in set(columns)]]

    def column_names(self, path) -> list:
        import pandas as pd

        return list(pd.read_csv(input_of(path), sep=self._sep(path), nrows=0, encoding="utf-8-sig").columns)

    def bad_line(self, path) -> int | None:
        """The first line whose record has another number of cells than the header."""
        import csv

        with _open_bytes(path) as fh:
            text = io.TextIOWrapper(fh, encoding="utf-8-sig", errors="replace", newline="")
            reader = csv.reader(text, delimiter=self._sep(path))
            width, start = None, 1
            for row in reader:
                if row:
                    width = len(row) if width is None else width
                    if len(row) != width:
                        return start
                start = reader.line_num + 1
        return None


class ParquetFormat(FileFormat):
    """Parquet prediction tables (``.parquet``, ``.pq``); filters pushed down to the reader."""

    name = "parquet"
    suffixes = (".parquet", ".pq")

    def schema(self, path):
        import pyarrow.parquet as pq

        return pq.read_schema(input_of(path))

    def batches(self, path, columns, text_columns, where, batch_rows: int):
        import pyarrow as pa
        import pyarrow.dataset as ds

        dataset = open_dataset(path, "parquet")
        expr = None if where is None else where.expression(dataset.schema)
        # Text labels are read as they are stored, a dictionary of the distinct
        # values and int32 indices: the coder then maps the small dictionary,
        # never hashes the rows. Columns the filter names keep their type.
        named = set() if where is None else set(where.columns)
        as_dictionary = [c for c in text_columns if c not in named
                         and arrow_kind(dataset.schema.field(c).type) == "text"
                         and not pa.types.is_dictionary(dataset.schema.field(c).type)]
        if as_dictionary:
            dataset = open_dataset(path, ds.ParquetFileFormat(
                read_options=ds.ParquetReadOptions(dictionary_columns=as_dictionary)))
        yield from dataset.to_batches(columns=columns, filter=expr, batch_size=batch_rows,
                                      batch_readahead=BATCH_READAHEAD, fragment_readahead=1)

    def frame(self, path, columns=None, labels=()):
        import pyarrow.parquet as pq

        names = self.schema(path).names
        cols = None if columns is None else [c for c in columns if c in names]
        return pq.read_table(input_of(path), columns=cols).to_pandas()


class JsonLinesFormat(FileFormat):
    """JSON Lines prediction tables (``.jsonl``, ``.ndjson``): one JSON object per line."""

    name = "jsonl"
    suffixes = (".jsonl", ".ndjson")

    def schema(self, path):
        import pyarrow as pa
        import pyarrow.json as pjson

        try:
            check_json_depth(path)
        except InvalidInputError as exc:
            raise UnreadableFile(exc) from None
        table = pjson.read_json(_first_lines(path),
                                read_options=pjson.ReadOptions(block_size=1 << 20))
        return pa.schema(table.schema)

    def batches(self, path, columns, text_columns, where, batch_rows: int):
        import pyarrow.json as pjson

        def selected():
            check_json_depth(path)
            reader = pjson.open_json(input_of(path),
                                     read_options=pjson.ReadOptions(block_size=BLOCK_BYTES))
            for batch in reader:
                missing = [c for c in columns if c not in batch.schema.names]
                if missing:
                    raise file_error(path, f"column {missing[0]!r} not found in some lines")
                yield batch.select(columns)

        yield from _filtered(selected(), where)

    def frame(self, path, columns=None, labels=()):
        import pandas as pd

        check_json_depth(path)
        df = pd.read_json(input_of(path), lines=True, dtype=False)  # labels as stored
        return df if columns is None else df[[c for c in columns if c in df.columns]]

    def column_names(self, path) -> list:
        import pandas as pd

        return list(pd.read_json(input_of(path), lines=True, nrows=1).columns)

    def bad_line(self, path) -> int | None:
        """The first non-blank line that is not one JSON object."""
        import json

        with _open_bytes(path) as fh:
            for number, line in enumerate(fh, start=1):
                if not line.strip():
                    continue
                try:
                    ok = isinstance(json.loads(line), dict)
                except (ValueError, RecursionError):
                    ok = False
                if not ok:
                    return number
        return None


class CountsMatrixFormat(FileFormat):
    """A counts matrix CSV (see :func:`foldcorr.sources.matrix.read_matrix`), when asked for.

    Its usual ending is ``.csv``, which a prediction table shares: a file is
    read as a counts matrix only when ``matrix`` is asked for, whatever its
    ending.
    """

    name = "matrix"
    suffixes = (".csv",)
    rows = False
    title = "matrix"

    def can_open(self, path, *, matrix: bool = False) -> bool:
        return matrix

    def tensor(self, path):
        return read_matrix(path)


class NetcdfFormat(FileFormat):
    """A saved evaluation (NetCDF-4, see :mod:`foldcorr.sources.saved`): it stands wherever
    a table can, and wins over ``matrix``."""

    name = "netcdf"
    suffixes = SAVED_SUFFIXES
    rows = False
    title = "saved evaluation"

    def can_open(self, path, *, matrix: bool = False) -> bool:
        return is_saved_path(path)

    def tensor(self, path):
        return load_saved(path).tensor

    def check_options(self, path, spec, **options) -> None:
        check_saved_options(path, spec, **options)


class MemoryFormat(FileFormat):
    """A table already in memory (see :mod:`foldcorr.sources.memory`): typed, like Parquet."""

    name = "table in memory"

    def can_open(self, path, *, matrix: bool = False) -> bool:
        return isinstance(path, MemoryTable)

    def name_of(self, path) -> str:
        return path.kind

    def schema(self, path):
        return path.schema()

    def batches(self, path, columns, text_columns, where, batch_rows: int):
        yield from path.batches(columns, where, batch_rows)

    def frame(self, path, columns=None, labels=()):
        import pyarrow as pa

        table = pa.Table.from_batches(list(path.batches(columns or path.schema().names, None,
                                                        1 << 30)), schema=None)
        return table.to_pandas()


#: Every format, in the order :func:`format_for` asks them.
FORMATS = (NetcdfFormat(), CountsMatrixFormat(), CsvFormat(), ParquetFormat(),
           JsonLinesFormat(), MemoryFormat())
#: The formats of prediction tables (one row per sample).
TABLE_FORMATS = tuple(f for f in FORMATS if f.rows)
#: File ending -> format name, of every prediction table format.
TABLE_SUFFIXES = {s: f.name_of(Path("x" + s)) for f in TABLE_FORMATS for s in f.suffixes}


def format_for(path, *, matrix: bool = False, among=FORMATS) -> FileFormat:
    """The first format of ``among`` that can open ``path``.

    Parameters
    ----------
    path : str or path-like
        The file.
    matrix : bool, default False
        A counts matrix is asked for.
    among : sequence of FileFormat, default FORMATS
        The formats to ask, in order (:data:`TABLE_FORMATS` for prediction
        tables only).

    Returns
    -------
    FileFormat

    Raises
    ------
    InvalidInputError
        When none can, naming the file and the endings known.

    Examples
    --------
    >>> format_for("runs/p.parquet").name, format_for("p.csv", matrix=True).name
    ('parquet', 'matrix')
    >>> format_for("p.nc", among=TABLE_FORMATS)
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidInputError: p.nc: unknown file type '.nc'; expected one of .csv, ...
    """
    for fmt in among:
        if fmt.can_open(path, matrix=matrix):
            return fmt
    known = ", ".join(sorted({s for f in among for s in f.suffixes}))
    raise file_error(path, f"unknown file type {Path(str(path)).suffix!r}; expected one of {known}")


def format_of(path) -> str:
    """The name of a prediction table's format, from its ending.

    Examples
    --------
    >>> format_of("runs/p.tsv")
    'tsv'
    """
    return format_for(path, among=TABLE_FORMATS).name_of(path)


def _filtered(batches, where):
    """Record batches filtered by ``where`` (its expression built on the first batch's schema)."""
    import pyarrow as pa

    expr = None
    for batch in batches:
        if where is not None:
            if expr is None:
                expr = where.expression(batch.schema)
            batch = pa.Table.from_batches([batch]).filter(expr)
        yield batch


def check_json_depth(path, limit: int = JSON_MAX_DEPTH) -> None:
    """Refuse a JSON Lines file with a line nested deeper than ``limit`` (before any parser
    sees it: deep nesting exhausts the parsers' stacks).

    Only a line with more opening brackets than ``limit`` is scanned, strings skipped (so
    ``"[[["`` inside a label is no nesting).

    Raises
    ------
    InvalidInputError
        Naming the file and the 1-based line.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.jsonl"
    >>> _ = p.write_text('{"actual": "[[[[", "predicted": "x"}\\n{"actual": [[[1]]]}\\n')
    >>> check_json_depth(p, limit=3)
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidInputError: p.jsonl: line 2 is nested deeper than 3 levels; ...
    """
    with _open_bytes(path) as fh:
        number = _deep_line(fh, limit)
    if number is not None:
        raise file_error(path, f"line {number} is nested deeper than {limit} levels; a JSON "
                               "Lines table holds one flat object a line")


def _deep_line(fh, limit: int) -> int | None:
    """The 1-based number of the first line of ``fh`` nested deeper than ``limit``, or None.

    The count of opening brackets bounds a line's depth, so only a line with more than
    ``limit`` of them is scanned character by character.
    """
    for number, line in enumerate(fh, start=1):
        if line.count(b"[") + line.count(b"{") > limit and _text_depth(line) > limit:
            return number
    return None


def _text_depth(text: bytes) -> int:
    """Deepest nesting of one JSON line, strings skipped."""
    deepest = depth = 0
    in_string = escaped = False
    for ch in text.decode("utf-8", "replace"):
        if in_string:
            escaped, in_string = (False, True) if escaped else (ch == "\\", ch != '"')
        elif ch == '"':
            in_string = True
        elif ch in "[{":
            depth += 1
            deepest = max(deepest, depth)
        elif ch in "]}":
            depth -= 1
    return deepest


def _open_bytes(path):
    return path.open() if isinstance(path, (RemoteFile, BytesFile)) else open(path, "rb")


def _first_lines(path, n: int = 1000):
    with _open_bytes(path) as fh:
        lines = []
        for _ in range(n):
            line = fh.readline()
            if not line:
                break
            if line.strip():
                lines.append(line)
    return io.BytesIO(b"".join(lines))

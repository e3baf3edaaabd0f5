"""Streaming sources: prediction tables tallied batch by batch in bounded memory.

A dataset is a file, a folder of files or a glob (CSV, TSV, Parquet, JSON
Lines). Each file is read in record batches with pyarrow, only the columns
needed, with an optional row filter (``where``) pushed down to the Parquet
reader. Every batch is coded and counted into a dense array at once, so memory
is bounded by the batch size and the size of the tensor, never by the number
of rows.

The result equals the in-memory tally (:func:`foldcorr.tensor.tally_frame` on
the whole table read with pandas): classes sorted (unless ``classes`` is
given), the fold coordinate sorted, the same provenance and the same error
messages naming file, column and row. To get there, labels are coded as they
come (codes stay stable while new labels appear) and the column types are
settled once at the end, the way pandas would settle them for the whole
column: text read from CSV becomes integers, floats or booleans when every
value of the column reads so, and a numeric column beside a text column is
turned to text (see ``foldcorr.sources.tables``).
"""

from __future__ import annotations

import contextlib
import glob as _glob
import math
import re
import sys
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from foldcorr.errors import FoldcorrError, InvalidInputError
from foldcorr.tensor import (
    ACTUAL,
    FOLD,
    PREDICTED,
    fixed_classes,
    py_value,
    sorted_codes,
    confusion_tensor,
    count_codes,
    bad_weight_message,
    missing_label_message,
    unknown_label_message,
)
from foldcorr._version import __version__

__all__ = [
    "TABLE_SUFFIXES",
    "Where",
    "parse_where",
    "resolve_paths",
    "StreamTally",
    "StreamResult",
    "SkippedFiles",
    "stream_tensor",
    "tally_dataset",
]

TABLE_SUFFIXES = {".csv": "csv", ".tsv": "tsv", ".parquet": "parquet", ".pq": "parquet",
                  ".jsonl": "jsonl", ".ndjson": "jsonl"}

#: Rows per record batch asked of the readers.
BATCH_ROWS = 1 << 20
#: Record batches the Parquet reader decodes ahead, in its own threads.
BATCH_READAHEAD = 1
#: Record batches a background thread reads ahead of the counting (0: none).
PREFETCH = 2
#: Bytes per CSV / JSON Lines block.
BLOCK_BYTES = 1 << 24
#: Integer labels in [0, DIRECT_MAX) are their own codes (no hashing).
DIRECT_MAX = 1 << 11
#: Rows a uint32 count array takes in before it is added to the int64 counts.
_PENDING_MAX = np.iinfo(np.uint32).max

_INT_TEXT = re.compile(r"\s*[+-]?[0-9]+\s*")
#: A decimal number written as text (after trimming), as ``--where`` reads one.
_NUMBER_TEXT = r"^[+-]?([0-9]+\.?[0-9]*|\.[0-9]+)([eE][+-]?[0-9]+)?$"
_BOOL_TEXT = {"True": True, "TRUE": True, "true": True,
              "False": False, "FALSE": False, "false": False}


def _fail(path, message: str) -> InvalidInputError:
    return InvalidInputError(f"{Path(path).name}: {message}")


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return text[0] if text else type(exc).__name__


def format_of(path: Path) -> str:
    """The table format of a file, from its ending.

    Examples
    --------
    >>> format_of(Path("runs/p.parquet"))
    'parquet'
    """
    fmt = TABLE_SUFFIXES.get(path.suffix.lower())
    if fmt is None:
        known = ", ".join(sorted(TABLE_SUFFIXES))
        raise _fail(path, f"unknown file type {path.suffix!r}; expected one of {known}")
    return fmt


def resolve_paths(path) -> list[Path]:
    """The files of a dataset: one file, every table file in a folder, or a glob.

    Parameters
    ----------
    path : str or path-like
        A file; a folder (its table files, searched recursively, in sorted
        order; hidden files are left out); or a glob pattern such as
        ``"runs/part-*.parquet"`` (``**`` matches folders recursively).

    Returns
    -------
    list of pathlib.Path
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
    text = str(path)
    p = Path(path)
    if p.is_file():
        return [p]
    if p.is_dir():
        files = sorted(f for f in p.rglob("*") if f.is_file()
                       and f.suffix.lower() in TABLE_SUFFIXES
                       and not any(part.startswith((".", "_")) for part in f.relative_to(p).parts))
        if not files:
            known = ", ".join(sorted(TABLE_SUFFIXES))
            raise _fail(p, f"the folder holds no table file (endings {known})")
        return files
    if _glob.has_magic(text):
        files = sorted(Path(f) for f in _glob.glob(text, recursive=True) if Path(f).is_file())
        if not files:
            raise InvalidInputError(f"the pattern {text!r} matches no file")
        return files
    raise _fail(p, "file not found")


# --------------------------------------------------------------------------- filters

_TOKEN = re.compile(r"""\s*(?:
    (?P<str>"(?:[^"\\]|\\.)*"|'(?:[^'\\]|\\.)*')
  | (?P<num>[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?)
  | (?P<op>==|!=|<=|>=|<|>|\(|\)|,)
  | (?P<name>[A-Za-z_][A-Za-z0-9_.]*|`[^`]+`)
)""", re.VERBOSE)

_COMPARE = ("==", "!=", "<", "<=", ">", ">=")


@dataclass(frozen=True)
class Where:
    """A parsed row filter: a tree of comparisons joined by ``and``/``or``/``not``.

    Attributes
    ----------
    text : str
        The filter as written.
    tree : tuple
        ``("cmp", column, op, value)``, ``("in", column, values)``,
        ``("not", node)``, ``("and", a, b)`` or ``("or", a, b)``.
    """

    text: str
    tree: tuple

    @property
    def columns(self) -> list[str]:
        """Columns the filter reads, in order of first use."""
        out: list[str] = []

        def walk(node):
            if node[0] in ("cmp", "in"):
                if node[1] not in out:
                    out.append(node[1])
            else:
                for child in node[1:]:
                    walk(child)

        walk(self.tree)
        return out

    def check_columns(self, names) -> None:
        """Raise when the filter names a column not among ``names``.

        Examples
        --------
        >>> parse_where('split == "test"').check_columns(["actual", "predicted"])
        Traceback (most recent call last):
        ...
        foldcorr.errors.InvalidInputError: `where` names column 'split', which the table does not have; it has ['actual', 'predicted']
        """
        for column in self.columns:
            if column not in names:
                raise InvalidInputError(
                    f"`where` names column {column!r}, which the table does not have; "
                    f"it has {list(names)!r}")

    def expression(self, schema):
        """The filter as a ``pyarrow.compute.Expression`` for a table of ``schema``.

        A number compared with a text column matches the texts that read as
        that number (``1``, ``1.0``, `` 1 ``), and is ordered against the
        column's values read as numbers (a text that is not a number is then
        an error); ``true``/``false`` match ``True``/``TRUE``/``true`` and
        their opposites. A text value compared with a numeric column is read
        as a number. So ``fold == 1`` and ``fold < 3`` work on CSV columns,
        which are read as text.
        """
        import pyarrow as pa
        import pyarrow.compute as pc

        def is_text(column):
            typ = schema.field(column).type
            if pa.types.is_dictionary(typ):
                typ = typ.value_type
            return pa.types.is_string(typ) or pa.types.is_large_string(typ)

        def text_number(column):
            """The text column read as float64, null where it is not a number."""
            trimmed = pc.utf8_trim_whitespace(pc.field(column).cast(pa.string()))
            number = pc.match_substring_regex(trimmed, _NUMBER_TEXT)
            return pc.if_else(number, trimmed, pa.scalar(None, pa.string())).cast(pa.float64())

        def text_matches(column, values):
            """True where a text column holds one of the numbers or booleans ``values``."""
            out = None
            numbers = [float(v) for v in values if not isinstance(v, bool)]
            flags = [v for v in values if isinstance(v, bool)]
            if numbers:
                out = pc.is_in(text_number(column), value_set=pa.array(numbers, pa.float64()))
            if flags:
                texts = [t for t, b in _BOOL_TEXT.items() if b in flags]
                hit = pc.is_in(pc.utf8_trim_whitespace(pc.field(column).cast(pa.string())),
                               value_set=pa.array(texts, pa.string()))
                out = hit if out is None else (out | hit)
            return pc.coalesce(out, pa.scalar(False))

        def literal(column, value):
            typ = schema.field(column).type
            if pa.types.is_dictionary(typ):
                typ = typ.value_type
            if isinstance(value, str) and (pa.types.is_integer(typ) or pa.types.is_floating(typ)):
                try:
                    return int(value) if pa.types.is_integer(typ) else float(value)
                except ValueError:
                    raise InvalidInputError(
                        f"`where`: column {column!r} holds numbers; cannot compare it "
                        f"with {value!r}") from None
            return value

        self.check_columns(schema.names)

        def build(node):
            kind = node[0]
            if kind == "cmp" and is_text(node[1]) and not isinstance(node[3], str):
                _, col, op, value = node
                if op in ("==", "!="):
                    hit = text_matches(col, [value])
                    return hit if op == "==" else (pc.is_valid(pc.field(col)) & ~hit)
                f = pc.utf8_trim_whitespace(pc.field(col).cast(pa.string())).cast(pa.float64())
                v = float(value)
                return {"<": f < v, "<=": f <= v, ">": f > v, ">=": f >= v}[op]
            if kind == "in" and is_text(node[1]) and not all(isinstance(v, str) for v in node[2]):
                _, col, values = node
                words = [v for v in values if isinstance(v, str)]
                hit = text_matches(col, [v for v in values if not isinstance(v, str)])
                return (hit | pc.field(col).isin(words)) if words else hit
            if kind == "cmp":
                _, col, op, value = node
                f, v = pc.field(col), literal(col, value)
                return {"==": f == v, "!=": f != v, "<": f < v, "<=": f <= v,
                        ">": f > v, ">=": f >= v}[op]
            if kind == "in":
                _, col, values = node
                return pc.field(col).isin([literal(col, v) for v in values])
            if kind == "not":
                return ~build(node[1])
            a, b = build(node[1]), build(node[2])
            return (a & b) if kind == "and" else (a | b)

        return build(self.tree)


def parse_where(text: str) -> Where:
    """Parse a row filter written in foldcorr's small filter syntax.

    Grammar (no code is ever evaluated)::

        filter  := either ("or" either)*
        either  := single ("and" single)*
        single  := "not" single | "(" filter ")" | column op value
                 | column "in" "(" value ("," value)* ")"
        op      := == | != | < | <= | > | >=
        value   := "text" | 'text' | number | true | false
        column  := a name of letters, digits, _ and . ; or any name in `backticks`

    Parameters
    ----------
    text : str
        The filter, e.g. ``'split == "test" and fold != 3'``.

    Returns
    -------
    Where

    Raises
    ------
    InvalidInputError
        On a syntax error, naming the position.

    Examples
    --------
    >>> parse_where('split == "test" and fold in (1, 2)').tree
    ('and', ('cmp', 'split', '==', 'test'), ('in', 'fold', (1, 2)))
    >>> parse_where('split = "test"')
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidInputError: `where`: cannot read 'split = "test"' at position 6 ('= "test"'); ...
    """
    tokens = _tokenize(text)
    pos = 0

    def error(at: int, what: str):
        where = tokens[at][1] if at < len(tokens) else len(text)
        rest = text[where:].strip()
        return InvalidInputError(
            f"`where`: cannot read {text!r} at position {where} ({rest!r}); {what}. "
            f"Expected comparisons like column == \"value\" or column in (1, 2), "
            f"joined by and / or / not")

    def peek(k=0):
        return tokens[pos + k][0] if pos + k < len(tokens) else None

    def take():
        nonlocal pos
        tok = tokens[pos]
        pos += 1
        return tok

    def value():
        if pos >= len(tokens):
            raise error(pos, "a value is missing")
        kind, val = take()[0]
        if kind in ("str", "num"):
            return val
        if kind == "name" and val in ("true", "false"):
            return val == "true"
        raise error(pos - 1, "expected a value (text in quotes, a number, true or false)")

    def single():
        tok = peek()
        if tok == ("name", "not"):
            take()
            return ("not", single())
        if tok == ("op", "("):
            take()
            node = disjunction()
            if peek() != ("op", ")"):
                raise error(pos, "a closing parenthesis is missing")
            take()
            return node
        if tok is None or tok[0] != "name":
            raise error(pos, "expected a column name")
        column = take()[0][1]
        if peek() == ("name", "in"):
            take()
            if peek() != ("op", "("):
                raise error(pos, "expected ( after in")
            take()
            values = [value()]
            while peek() == ("op", ","):
                take()
                values.append(value())
            if peek() != ("op", ")"):
                raise error(pos, "a closing parenthesis is missing")
            take()
            return ("in", column, tuple(values))
        op = peek()
        if op is None or op[0] != "op" or op[1] not in _COMPARE:
            raise error(pos, "expected a comparison (==, !=, <, <=, >, >=) or in")
        take()
        return ("cmp", column, op[1], value())

    def conjunction():
        node = single()
        while peek() == ("name", "and"):
            take()
            node = ("and", node, single())
        return node

    def disjunction():
        node = conjunction()
        while peek() == ("name", "or"):
            take()
            node = ("or", node, conjunction())
        return node

    if not tokens:
        raise InvalidInputError("`where` is empty; expected e.g. split == \"test\"")
    tree = disjunction()
    if pos != len(tokens):
        raise error(pos, "unexpected text after the filter")
    return Where(text=text, tree=tree)


def _tokenize(text: str) -> list:
    tokens, pos = [], 0
    while pos < len(text):
        if text[pos:].strip() == "":
            break
        m = _TOKEN.match(text, pos)
        if not m or m.end() == pos:
            start = pos + len(text[pos:]) - len(text[pos:].lstrip())
            rest = text[start:]
            raise InvalidInputError(
                f"`where`: cannot read {text!r} at position {start} ({rest!r}); unknown symbol. "
                f"Expected comparisons like column == \"value\" or column in (1, 2), "
                f"joined by and / or / not")
        start = m.start(m.lastgroup)
        raw = m.group(m.lastgroup)
        if m.lastgroup == "str":
            val = re.sub(r"\\(.)", r"\1", raw[1:-1])
        elif m.lastgroup == "num":
            val = float(raw) if any(ch in raw for ch in ".eE") else int(raw)
        elif m.lastgroup == "name" and raw.startswith("`"):
            val = raw[1:-1]
        else:
            val = raw
        tokens.append(((m.lastgroup, val), start))
        pos = m.end()
    return tokens


# --------------------------------------------------------------------------- coding

class _Coder:
    """Stable integer codes for the values of one column, across batches and files.

    Small non-negative integers are their own codes (no hashing) until a value
    outside that range appears; then the coder switches to a dictionary that
    keeps every code given so far.
    """

    def __init__(self, *, text: bool):
        self.text = text          # values are CSV text; their type is settled at the end
        self.direct = True        # codes are the integer values themselves
        self.size = 0
        self.index: dict = {}
        self.values: list = []
        self.kinds: set[str] = set()

    def __len__(self) -> int:
        return self.size

    def encode(self, arr) -> tuple[np.ndarray, np.ndarray | None]:
        """Codes of an arrow array (-1 where null) and the null mask (None if none)."""
        import pyarrow as pa
        import pyarrow.compute as pc

        if isinstance(arr, pa.ChunkedArray):
            arr = arr.combine_chunks()
        typ = arr.type
        self.kinds.add(_kind(typ))
        if self.direct and pa.types.is_integer(typ) and arr.null_count == 0 and len(arr):
            bounds = pc.min_max(arr)
            lo, hi = bounds["min"].as_py(), bounds["max"].as_py()
            if lo >= 0 and hi < DIRECT_MAX:
                self.size = max(self.size, hi + 1)
                return arr.to_numpy(), None
        if self.direct and len(arr):
            self._to_dictionary()
        if not len(arr):
            return np.zeros(0, dtype=np.int64), None
        enc = arr if pa.types.is_dictionary(typ) else pc.dictionary_encode(arr)
        lut = np.fromiter((self._code(v) for v in enc.dictionary.to_pylist()),
                          dtype=np.int64, count=len(enc.dictionary))
        lut = np.append(lut, -1).astype(np.int32 if len(lut) < 1 << 31 else np.int64)
        idx = enc.indices
        nulls = None
        if idx.null_count:
            nulls = idx.is_null().to_numpy(zero_copy_only=False)
            idx = pc.fill_null(idx, -1)
        return lut[idx.to_numpy()], nulls

    def _to_dictionary(self) -> None:
        self.direct = False
        self.values = list(range(self.size))
        self.index = {v: v for v in self.values}

    def _code(self, value) -> int:
        code = self.index.get(value)
        if code is None:
            code = self.index[value] = len(self.values)
            self.values.append(value)
            self.size = len(self.values)
        return code

    def value_of(self, codes) -> list:
        """The raw values of codes."""
        if self.direct:
            return [int(c) for c in codes]
        return [self.values[c] for c in codes]

    def merge(self, other: _Coder) -> np.ndarray:
        """Take in the codes of ``other``; return the map from its codes to ours."""
        self.kinds |= other.kinds
        if self.direct and other.direct:
            self.size = max(self.size, other.size)
            return np.arange(other.size, dtype=np.int64)
        if self.direct:
            self._to_dictionary()
        return np.fromiter((self._code(v) for v in other.value_of(range(other.size))),
                           dtype=np.int64, count=other.size)


def _kind(typ) -> str:
    import pyarrow as pa

    if pa.types.is_dictionary(typ):
        typ = typ.value_type
    if pa.types.is_boolean(typ):
        return "bool"
    if pa.types.is_integer(typ):
        return "int"
    if pa.types.is_floating(typ):
        return "float"
    if pa.types.is_string(typ) or pa.types.is_large_string(typ):
        return "text"
    if pa.types.is_null(typ):
        return "null"
    return "other"


def _settle(coder: _Coder, codes: np.ndarray) -> tuple[str, list]:
    """The column kind and typed values of the seen codes, as pandas would read them."""
    raw = coder.value_of(codes)
    if coder.text:
        if all(v in _BOOL_TEXT for v in raw):
            return "bool", [_BOOL_TEXT[v] for v in raw]
        if all(_INT_TEXT.fullmatch(v) for v in raw):
            return "int", [int(v) for v in raw]
        try:
            return "float", [float(v) for v in raw]
        except ValueError:
            return "text", raw
    kinds = coder.kinds - {"null"}
    if kinds <= {"int"}:
        return "int", raw
    if kinds <= {"int", "float"}:
        return "float", [float(v) for v in raw]
    if kinds == {"bool"}:
        return "bool", raw
    return "object", raw


def _as_text(kind: str, values: list) -> list:
    """Text labels, as ``foldcorr.sources.tables`` turns a numeric column into text."""
    if kind == "float" and all(math.isfinite(v) and float(v).is_integer() for v in values):
        return [str(int(v)) for v in values]
    return [v if isinstance(v, str) else str(v) for v in values]


# --------------------------------------------------------------------------- tally

@dataclass
class _FileCheck:
    """What the checks of one file found (rows count within the file)."""

    first_null: dict = field(default_factory=dict)   # column role -> first row
    nulls: dict = field(default_factory=dict)        # column role -> count
    bad_weight: tuple | None = None                  # (row, value)
    rows: int = 0


class StreamTally:
    """Accumulate a confusion tensor from record batches, in bounded memory.

    Counts live in a dense array indexed by the codes of truth, predictions
    and folds (each column coded on its own); it grows as new labels appear.
    :meth:`add` codes a batch and counts it; :meth:`merge` adds another
    accumulator (possibly with other codes); :meth:`tensor` settles the types
    of the labels, sorts them and returns the labelled tensor.

    Parameters
    ----------
    truth, pred : str
        Column names of the actual and predicted labels.
    fold : str, optional
        Column of fold labels.
    weight : str, optional
        Column of sample weights.
    text : bool, default False
        Labels arrive as CSV text whose type is settled at the end.

    Examples
    --------
    >>> import pyarrow as pa
    >>> acc = StreamTally("actual", "predicted")
    >>> acc.add(pa.record_batch({"actual": ["b", "a"], "predicted": ["b", "b"]}))
    >>> acc.add(pa.record_batch({"actual": ["c"], "predicted": ["a"]}))
    >>> t = acc.tensor()
    >>> t.coords["actual"].values.tolist(), t.values.tolist()
    (['a', 'b', 'c'], [[0, 1, 0], [0, 1, 0], [1, 0, 0]])
    """

    def __init__(self, truth: str = ACTUAL, pred: str = PREDICTED, fold: str | None = None,
                 weight: str | None = None, *, text: bool = False):
        self.truth, self.pred, self.fold, self.weight = truth, pred, fold, weight
        self.coders = {"truth": _Coder(text=text), "pred": _Coder(text=text)}
        if fold is not None:
            self.coders["fold"] = _Coder(text=text)
        self._counts = np.zeros((1, 0, 0), dtype=np.float64 if weight else np.int64)
        # Unweighted batches are counted into a uint32 array of the same shape
        # (half the memory an int64 count touches per row), added into the
        # int64 counts before it could overflow and whenever they are read.
        self._pending = None
        self._pending_rows = 0
        self._counted = False     # whether _counts holds any count yet
        self.seen = {role: np.zeros(0, dtype=bool) for role in self.coders} if weight else None
        self.rows = 0
        self.nulls = {"truth": 0, "pred": 0}

    @property
    def counts(self) -> np.ndarray:
        """The count array (folds x K_truth x K_pred), in the coders' codes."""
        self._flush()
        return self._counts

    @counts.setter
    def counts(self, value) -> None:
        self._flush()
        self._counts = value

    def _flush(self) -> None:
        if self._pending is not None:
            if self._counted:
                self._counts += self._pending
            else:   # one new array instead of touching a zero one and adding
                self._counts = self._pending.astype(self._counts.dtype)
            self._counted = True
            self._pending = None
            self._pending_rows = 0

    def _source(self) -> np.ndarray:
        """The counts to read, without adding the uint32 batch counts into int64 first
        when those are all there is (one large array less to write)."""
        if self._pending is not None and not self._counted:
            return self._pending
        return self.counts

    def _target(self, rows: int, weighted: bool) -> np.ndarray:
        """The array to count ``rows`` more rows into."""
        if weighted or rows > _PENDING_MAX:
            self._flush()
            self._counted = True
            return self._counts
        if self._pending is not None and self._pending_rows + rows > _PENDING_MAX:
            self._flush()
        if self._pending is None:
            self._pending = np.zeros(self._counts.shape, dtype=np.uint32)
        self._pending_rows += rows
        return self._pending

    # -- counting
    def add(self, batch, check: _FileCheck | None = None) -> None:
        """Code and count one record batch (a ``pyarrow.RecordBatch`` or Table)."""
        n = batch.num_rows
        if n == 0:
            return
        codes, keep = {}, None
        names = {"truth": self.truth, "pred": self.pred, "fold": self.fold}
        for role, coder in self.coders.items():
            c, nulls = coder.encode(batch.column(names[role]))
            codes[role] = c
            if nulls is not None:
                if role in self.nulls:
                    self.nulls[role] += int(nulls.sum())
                if check is not None and role not in check.first_null:
                    check.first_null[role] = check.rows + int(np.flatnonzero(nulls)[0])
                if check is not None:
                    check.nulls[role] = check.nulls.get(role, 0) + int(nulls.sum())
                keep = ~nulls if keep is None else keep & ~nulls
        w = None
        if self.weight is not None:
            w = _weights(batch.column(self.weight))
            bad = ~np.isfinite(w) | (w < 0)
            if bad.any():
                if check is not None and check.bad_weight is None:
                    i = int(np.flatnonzero(bad)[0])
                    check.bad_weight = (check.rows + i, w[i])
                keep = ~bad if keep is None else keep & ~bad
        if check is not None:
            check.rows += n
        if keep is not None:
            codes = {role: c[keep] for role, c in codes.items()}
            w = None if w is None else w[keep]
        self._grow()
        if self.seen is not None:
            for role, c in codes.items():
                self.seen[role][np.unique(c)] = True
        self.rows += len(codes["truth"])
        order = [codes["fold"]] if "fold" in codes else []
        order += [codes["truth"], codes["pred"]]
        target = self._target(len(codes["truth"]), w is not None)
        if "fold" not in codes:
            target = target[0]
        count_codes(order, target.shape, weights=w, out=target)

    def _grow(self) -> None:
        f = len(self.coders["fold"]) if "fold" in self.coders else 1
        kt, kp = len(self.coders["truth"]), len(self.coders["pred"])
        old = self._counts.shape
        if (f, kt, kp) != old:
            new = np.zeros((max(f, old[0]), max(kt, old[1]), max(kp, old[2])), self._counts.dtype)
            new[: old[0], : old[1], : old[2]] = self.counts
            self.counts = new
        if self.seen is not None:
            for role, coder in self.coders.items():
                if len(self.seen[role]) < len(coder):
                    self.seen[role] = np.concatenate(
                        [self.seen[role], np.zeros(len(coder) - len(self.seen[role]), bool)])

    def __getstate__(self) -> dict:
        # Partial tallies travel between processes: counts go in the narrowest
        # unsigned type that holds them (often 2 or 4 bytes instead of 8).
        self._flush()
        state = dict(self.__dict__)
        c = self._counts
        if c.dtype == np.int64 and c.size:
            top = int(c.max())
            for small in (np.uint8, np.uint16, np.uint32):
                if top <= np.iinfo(small).max:
                    state["_counts"] = c.astype(small)
                    break
        return state

    def __setstate__(self, state: dict) -> None:
        counts = state["_counts"]
        if counts.dtype.kind == "u":
            state["_counts"] = counts.astype(np.int64)
        self.__dict__.update(state)

    def merge(self, other: StreamTally) -> StreamTally:
        """Add the counts of ``other`` (coded on its own) into this accumulator.

        Returns
        -------
        StreamTally
            ``self``.
        """
        maps = {role: self.coders[role].merge(other.coders[role]) for role in self.coders}
        self._grow()
        c = other.counts
        f_map = maps.get("fold", np.zeros(1, np.int64))
        parts = [m[:n] for m, n in zip((f_map, maps["truth"], maps["pred"]), c.shape)]
        if all(np.array_equal(m, np.arange(len(m))) for m in parts):
            self.counts[: c.shape[0], : c.shape[1], : c.shape[2]] += c   # same codes
        else:
            self.counts[np.ix_(*parts)] += c
        self._counted = True
        if self.seen is not None:
            for role, m in maps.items():
                self.seen[role][m[: len(other.seen[role])][other.seen[role]]] = True
        self.rows += other.rows
        for role in self.nulls:
            self.nulls[role] += other.nulls[role]
        return self

    # -- result
    def _seen_codes(self, role: str) -> np.ndarray:
        if self.seen is not None:
            return np.flatnonzero(self.seen[role])
        c = self._source()
        axis = {"fold": (1, 2), "truth": (0, 2), "pred": (0, 1)}[role]
        return np.flatnonzero(c.sum(axis=axis) > 0) if c.size else np.zeros(0, np.int64)

    def labels(self) -> dict:
        """Per column role: (seen codes, kind, typed values), after the text rule."""
        out = {role: (codes, *_settle(self.coders[role], codes))
               for role in self.coders for codes in [self._seen_codes(role)]}
        (ct, kt, vt), (cp, kp, vp) = out["truth"], out["pred"]
        numeric = [k in ("int", "float") for k in (kt, kp)]
        if numeric[0] != numeric[1]:
            out["truth"] = (ct, "text", _as_text(kt, vt))
            out["pred"] = (cp, "text", _as_text(kp, vp))
        elif all(numeric) and "float" in (kt, kp):
            out["truth"] = (ct, "float", [float(v) for v in vt])
            out["pred"] = (cp, "float", [float(v) for v in vp])
        return out

    def tensor(self, *, classes=None, attrs=None, unknown=None):
        """The labelled confusion tensor.

        Parameters
        ----------
        classes : sequence, optional
            Fixed class order; labels outside it are reported through
            ``unknown(role, bad_codes, classes)``, which must raise.
        attrs : dict, optional
            Provenance added to the tensor's attrs.
        unknown : callable, optional
            Called as described above; without it a generic error is raised.

        Returns
        -------
        xarray.DataArray
        """
        lab = self.labels()
        (ct, kt, vt), (cp, _, vp) = lab["truth"], lab["pred"]
        if classes is not None:
            labels = fixed_classes(_coerce(classes, kt))
            position = {_key(v): i for i, v in enumerate(labels)}
            for role, codes, values in (("truth", ct, vt), ("pred", cp, vp)):
                bad = [c for c, v in zip(codes, values) if _key(v) not in position]
                if bad or self.nulls[role]:
                    if unknown is not None:
                        unknown(role, np.array(bad), labels)
                    name = self.truth if role == "truth" else self.pred
                    raise InvalidInputError(
                        f"column {name!r}: labels outside the classes {labels!r}")
            map_t = np.array([position[_key(v)] for v in vt], dtype=np.int64)
            map_p = np.array([position[_key(v)] for v in vp], dtype=np.int64)
        else:
            union, where = [], {}
            for v in [*vt, *vp]:
                k = _key(v)
                if k not in where:
                    where[k] = len(union)
                    union.append(v)
            codes = np.arange(len(union))
            rank, ordered = sorted_codes(codes, np.asarray(union + [None], dtype=object)[:-1])
            labels = [py_value(v) for v in ordered]
            map_t = np.array([rank[where[_key(v)]] for v in vt], dtype=np.int64)
            map_p = np.array([rank[where[_key(v)]] for v in vp], dtype=np.int64)
        k = len(labels)
        leading = {}
        if "fold" in lab:
            cf, _, vf = lab["fold"]
            rank_f, fold_values = sorted_codes(np.arange(len(vf)),
                                                np.asarray(vf + [None], dtype=object)[:-1])
            # rank_f[i] is where fold code cf[i] goes; gather by its inverse.
            folds = _take(self._source(), np.argsort(rank_f, kind="stable"), 0, cf)
            leading[FOLD] = [py_value(v) for v in fold_values]
        else:
            folds = self._source()[:1]
        src = _take(_take(folds, ct, 1), cp, 2)
        if _injective(map_t, k) and _injective(map_p, k):
            if len(map_t) == k and len(map_p) == k:  # a permutation: gather by its inverse
                out = _take(_take(src, np.argsort(map_t), 1), np.argsort(map_p), 2)
            else:
                out = np.zeros((src.shape[0], k, k), dtype=src.dtype)
                out[:, map_t[:, None], map_p[None, :]] = src
        else:
            out = np.zeros((src.shape[0], k, k), dtype=src.dtype)
            for i, a in enumerate(map_t):
                np.add.at(out, (slice(None), a, map_p), src[:, i, :])
        if out.dtype != self._counts.dtype:        # uint32 batch counts: a new int64 array
            out = out.astype(self._counts.dtype)
        elif np.may_share_memory(out, self._counts):  # the tensor must not change with the tally
            out = out.copy()
        if not leading:
            out = out[0]
        return confusion_tensor(out, labels, leading=leading, attrs=dict(attrs or {}))


def _take(a: np.ndarray, order, axis: int, codes=None) -> np.ndarray:
    """``a`` indexed along ``axis`` by ``codes[order]`` (``codes`` defaults to 0, 1, ...).

    A run of consecutive indices is a slice (a view, no copy); others use
    ``numpy.take``.
    """
    index = np.asarray(order, dtype=np.int64)
    if codes is not None:
        index = np.asarray(codes, dtype=np.int64)[index]
    if len(index) and np.array_equal(index, np.arange(index[0], index[0] + len(index))):
        return a[(slice(None),) * axis + (slice(int(index[0]), int(index[0]) + len(index)),)]
    return np.take(a, index, axis=axis)


def _injective(mapping: np.ndarray, k: int) -> bool:
    """Whether no two codes map to the same class."""
    return len(mapping) == len(np.unique(mapping)) if len(mapping) <= k else False


def _key(value):
    """A dict key that keeps 1, 1.0 and True together (as pandas factorises them),
    but NaN equal to NaN."""
    if isinstance(value, float) and math.isnan(value):
        return ("nan",)
    return value


def _coerce(classes, kind: str) -> tuple:
    """Class names given as text, as the truth column's type (see foldcorr.sources.tables)."""
    if kind in ("int", "float"):
        caster = int if kind == "int" else float
        try:
            return tuple(caster(c) for c in classes)
        except (TypeError, ValueError):
            return tuple(classes)
    return tuple(classes)


def _weights(arr) -> np.ndarray:
    import pyarrow as pa
    import pyarrow.compute as pc

    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks()
    if not (pa.types.is_integer(arr.type) or pa.types.is_floating(arr.type)
            or pa.types.is_null(arr.type)):
        raise InvalidInputError("weights must be numbers")
    arr = pc.cast(arr, pa.float64())
    return arr.to_numpy(zero_copy_only=False).astype(np.float64)


# --------------------------------------------------------------------------- reading

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


class _SkipFile(FoldcorrError):
    """A file that cannot be read or whose columns disagree (skippable)."""


def _schema(path: Path, fmt: str):
    """The arrow schema of a file, cheaply (the header or the footer only)."""
    import pyarrow as pa

    if fmt == "parquet":
        import pyarrow.parquet as pq

        return pq.read_schema(path)
    if fmt in ("csv", "tsv"):
        import pyarrow.csv as pcsv

        if path.stat().st_size == 0:
            raise _SkipFile(_fail(path, "the file is empty"))
        reader = pcsv.open_csv(path, read_options=pcsv.ReadOptions(block_size=1 << 16),
                               parse_options=_parse_options(fmt),
                               convert_options=pcsv.ConvertOptions(
                                   column_types=_AllText(), strings_can_be_null=True))
        return reader.schema
    import pyarrow.json as pjson

    table = pjson.read_json(_first_lines(path), read_options=pjson.ReadOptions(block_size=1 << 20))
    return pa.schema(table.schema)


class _AllText(dict):
    """column_types for pyarrow's CSV reader: every column it asks about is text."""

    def __missing__(self, key):
        import pyarrow as pa

        return pa.string()

    def __contains__(self, key):
        return True


def _first_lines(path: Path, n: int = 1000):
    import io

    with open(path, "rb") as fh:
        lines = []
        for _ in range(n):
            line = fh.readline()
            if not line:
                break
            if line.strip():
                lines.append(line)
    return io.BytesIO(b"".join(lines))


def _parse_options(fmt: str):
    import pyarrow.csv as pcsv

    return pcsv.ParseOptions(delimiter="," if fmt == "csv" else "\t", newlines_in_values=True)


def _batches(path: Path, fmt: str, columns: list[str], text_columns: list[str], where,
             batch_rows: int):
    """Record batches of the needed columns, filtered by ``where``."""
    import pyarrow as pa

    if fmt == "parquet":
        import pyarrow.dataset as ds

        dataset = ds.dataset(path, format="parquet")
        expr = None if where is None else where.expression(dataset.schema)
        # Text labels are read as they are stored, a dictionary of the distinct
        # values and int32 indices: the coder then maps the small dictionary,
        # never hashes the rows. Columns the filter names keep their type.
        named = set() if where is None else set(where.columns)
        as_dictionary = [c for c in text_columns if c not in named
                         and _kind(dataset.schema.field(c).type) == "text"
                         and not pa.types.is_dictionary(dataset.schema.field(c).type)]
        if as_dictionary:
            dataset = ds.dataset(path, format=ds.ParquetFileFormat(
                read_options=ds.ParquetReadOptions(dictionary_columns=as_dictionary)))
        yield from dataset.to_batches(columns=columns, filter=expr, batch_size=batch_rows,
                                      batch_readahead=BATCH_READAHEAD,
                                      fragment_readahead=1)
        return
    if fmt in ("csv", "tsv"):
        import pyarrow.csv as pcsv

        reader = pcsv.open_csv(
            path, read_options=pcsv.ReadOptions(block_size=BLOCK_BYTES),
            parse_options=_parse_options(fmt),
            convert_options=pcsv.ConvertOptions(
                include_columns=columns, strings_can_be_null=True,
                column_types={**{c: pa.float64() for c in columns if c not in text_columns},
                              **{c: pa.string() for c in text_columns}}))
    else:
        import pyarrow.json as pjson

        reader = pjson.open_json(path, read_options=pjson.ReadOptions(block_size=BLOCK_BYTES))
    expr = None
    for batch in reader:
        if fmt == "jsonl":
            missing = [c for c in columns if c not in batch.schema.names]
            if missing:
                raise _fail(path, f"column {missing[0]!r} not found in some lines")
            batch = batch.select(columns)
        if where is not None:
            if expr is None:
                expr = where.expression(batch.schema)
            batch = pa.Table.from_batches([batch]).filter(expr)
        yield batch


def stream_tensor(path, *, truth: str = ACTUAL, pred: str = PREDICTED, fold: str | None = "auto",
                  weight: str | None = None, classes=None, where=None,
                  skip_bad_files: bool = False, progress: bool | None = None,
                  batch_rows: int = BATCH_ROWS) -> StreamResult:
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
        Row filter (see :func:`parse_where`), pushed down to Parquet.
    skip_bad_files : bool, default False
        Skip files that cannot be read or lack a needed column, and report
        them in :attr:`StreamResult.skipped`, instead of stopping.
    progress : bool, optional
        Show a progress bar on stderr; default: only when stderr is a terminal.
    batch_rows : int
        Rows per record batch.

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
        raise _fail(files[0] if len(files) == 1 else Path(str(path)),
                    f"truth and pred name the same column {truth!r}")
    if isinstance(where, str):
        where = parse_where(where)
    show = sys.stderr.isatty() if progress is None else progress
    bar = _Progress(len(files)) if show else None
    try:
        return _stream(path, files, truth, pred, fold, weight, classes, where,
                       skip_bad_files, batch_rows, bar)
    finally:
        if bar is not None:
            bar.close()


@dataclass(frozen=True)
class _Plan:
    """What the schemas of a dataset's files say, read before any row."""

    files: tuple          # files to read, with their format
    skipped: tuple        # (name, reason) of files left out
    truth: str
    pred: str
    fold: str | None
    weight: str | None
    text: bool            # CSV text labels (their types settled at the end)
    where: object
    source: str
    single: bool

    def columns(self) -> list[str]:
        cols = [c for c in dict.fromkeys([self.truth, self.pred, self.fold, self.weight]) if c]
        if self.where is not None:
            cols += [c for c in self.where.columns if c not in cols]
        return cols

    def text_columns(self) -> list[str]:
        """Columns the CSV reader reads as text: labels, fold and the filter's columns.

        Their types are then settled over all their values (labels) or
        compared as :meth:`Where.expression` says (filter columns), never
        guessed from the first block.
        """
        cols = [self.truth, self.pred] + ([self.fold] if self.fold else [])
        if self.where is not None:
            cols += [c for c in self.where.columns if c not in cols and c != self.weight]
        return cols

    def new_tally(self) -> StreamTally:
        return StreamTally(self.truth, self.pred, self.fold, self.weight, text=self.text)


def _plan(path, files, truth, pred, fold, weight, where, skip_bad_files) -> _Plan:
    """Check every file's columns (header or footer only) against the first readable one."""
    first: dict = {}
    chosen, skipped = [], []
    fold_col, text = None, False
    for f in files:
        try:
            fmt = format_of(f)
            schema = _checked_schema(f, fmt, truth, pred, fold, weight, first, where)
            if not first:
                fold_col = (FOLD if FOLD in schema.names else None) if fold == "auto" else fold
                text = fmt in ("csv", "tsv")
                first.update({c: _kind(schema.field(c).type) for c in
                              [truth, pred, fold_col, weight] if c})
                first["__file__"], first["__text__"] = f.name, text
            elif (fmt in ("csv", "tsv")) != text:
                raise _SkipFile(_fail(f, "CSV and typed files (Parquet, JSON Lines) cannot be "
                                         f"mixed in one dataset; the first file is "
                                         f"{first['__file__']}"))
            _require(f, schema, [fold_col])
            chosen.append((f, fmt))
        except _SkipFile as exc:
            if not skip_bad_files:
                raise exc.args[0] from None
            skipped.append(_skip_entry(exc))
    if not chosen:
        raise InvalidInputError(f"no readable file among {len(files)}; first problem: "
                                f"{skipped[0][0]}: {skipped[0][1]}")
    single = len(files) == 1
    return _Plan(files=tuple(chosen), skipped=tuple(skipped), truth=truth, pred=pred,
                 fold=fold_col, weight=weight, text=text, where=where,
                 source=files[0].name if single else Path(str(path)).name, single=single)


def _skip_entry(exc: _SkipFile) -> tuple[str, str]:
    name, _, why = str(exc.args[0]).partition(": ")
    return name, why


def _tally_file(plan: _Plan, f: Path, fmt: str, classes, batch_rows: int,
                bar=None) -> StreamTally:
    """Tally one file on its own; raise _SkipFile when it cannot be read."""
    return _count_file_into(plan.new_tally(), plan, f, fmt, classes, batch_rows, bar)


def _count_file_into(acc: StreamTally, plan: _Plan, f: Path, fmt: str, classes,
                     batch_rows: int, bar=None) -> StreamTally:
    """Add every batch of one file to ``acc``, then run the file's checks; return ``acc``."""
    check = _FileCheck()
    # closing: on an error the read-ahead thread stops now, not when the traceback goes
    with contextlib.closing(_read(f, fmt, plan.columns(), plan.text_columns(), plan.where,
                                  batch_rows)) as batches:
        for batch in batches:
            try:
                acc.add(batch, check)
            except InvalidInputError as exc:
                raise _fail(f, str(exc)) from None
            if bar is not None:
                bar.rows(batch.num_rows)
    _raise_checks(f, check, acc, classes)
    return acc


def _finish(plan: _Plan, acc: StreamTally, used, skipped, classes, batch_rows) -> StreamResult:
    """Settle labels and provenance; the same for every engine."""
    name = plan.files[0][0] if plan.single else Path(plan.source)
    if acc.rows == 0:
        raise _fail(name, "no rows pass the filter" if plan.where is not None
                    else "the table has no rows")
    attrs = {"truth_column": plan.truth, "pred_column": plan.pred}
    if plan.fold:
        attrs["by_columns"] = f"{FOLD}={plan.fold}"
    if plan.weight:
        attrs["weight_column"] = plan.weight
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
        _locate_unknown(acc, used, role, bad_codes, labels, plan.where, batch_rows)

    try:
        tensor = acc.tensor(classes=classes, attrs=attrs, unknown=unknown)
    except InvalidInputError as exc:
        if str(exc).startswith(tuple(f"{f.name}:" for f, _ in plan.files)):
            raise
        raise _fail(name, str(exc)) from None
    return StreamResult(tensor=tensor, files=tuple(f.name for f in used),
                        skipped=tuple(skipped), rows=int(acc.rows))


def _stream(path, files, truth, pred, fold, weight, classes, where, skip_bad_files,
            batch_rows, bar) -> StreamResult:
    plan = _plan(path, files, truth, pred, fold, weight, where, skip_bad_files)
    if bar is not None:
        bar.advance(len(plan.skipped))
    acc, used, skipped = _tally_files(plan, plan.files, classes, skip_bad_files, batch_rows, bar)
    skipped = list(plan.skipped) + skipped
    if acc is None:
        raise InvalidInputError(f"no readable file among {len(files)}; first problem: "
                                f"{skipped[0][0]}: {skipped[0][1]}")
    return _finish(plan, acc, used, skipped, classes, batch_rows)


def _tally_files(plan: _Plan, files, classes, skip_bad_files: bool, batch_rows: int, bar=None):
    """Tally (file, format) pairs in order; return the tally, files used and files skipped.

    When files may be skipped, each is counted on its own first and added only
    once it was read to the end, so a file that fails half-way adds nothing.
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
        except _SkipFile as exc:
            if not skip_bad_files:
                raise exc.args[0] from None
            skipped.append(_skip_entry(exc))
        if bar is not None:
            bar.advance(1)
    return acc, used, skipped


def _prefetch(items, depth: int):
    """The items of an iterator, read ahead by a background thread into a bounded queue.

    The readers decode while the caller counts (numpy and pyarrow release the
    GIL), and at most ``depth`` items wait, so memory stays bounded. An error
    of the iterator is raised here, in the caller's thread, in its turn.
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


def _read(f, fmt, columns, text_cols, where, batch_rows):
    """Batches of one file; read errors become skippable errors naming the file."""
    with contextlib.closing(_prefetch(_batches(f, fmt, columns, text_cols, where, batch_rows),
                                      PREFETCH)) as it:
        yield from _checked_batches(f, fmt, it, where)


def _checked_batches(f, fmt, it, where):
    while True:
        try:
            batch = next(it)
        except StopIteration:
            return
        except FoldcorrError:
            raise
        except Exception as exc:  # pyarrow raises its own error types
            text = _first_line(exc)
            if "conversion error to double" in text:  # data, not damage: never skipped
                raise _fail(f, f"weights must be numbers ({text})") from None
            if where is not None and text.startswith("Failed to parse string"):
                raise _fail(f, f"`where` {where.text!r} orders a column against a number, but "
                               f"the column holds text that is not a number ({text})") from None
            raise _SkipFile(_fail(f, f"cannot read as {fmt}: {text}")) from None
        yield batch


def _checked_schema(f, fmt, truth, pred, fold, weight, first_types, where):
    try:
        schema = _schema(f, fmt)
    except _SkipFile:
        raise
    except Exception as exc:  # pyarrow raises its own error types
        raise _SkipFile(_fail(f, f"cannot read as {fmt}: {_first_line(exc)}")) from None
    names = [c for c in (truth, pred, weight) if c]
    if fold not in (None, "auto"):
        names.append(fold)
    _require(f, schema, names)
    if where is not None:  # a filter naming a missing column is the caller's, never skipped
        try:
            where.check_columns(schema.names)
        except InvalidInputError as exc:
            raise _fail(f, str(exc)) from None
    if first_types:
        for col, kind in first_types.items():
            if col.startswith("__") or col not in schema.names:
                continue
            here = _kind(schema.field(col).type)
            if not first_types["__text__"] and here != kind and {here, kind} - {"null"}:
                raise _SkipFile(_fail(f, f"column {col!r} holds {here} values here but "
                                         f"{kind} values in {first_types['__file__']}"))
    return schema


def _require(f, schema, names) -> None:
    for name in names:
        if name is not None and name not in schema.names:
            raise _SkipFile(_fail(f, f"column {name!r} not found; the table has "
                                     f"{list(schema.names)!r}"))


def _raise_checks(f, check: _FileCheck, acc: StreamTally, classes) -> None:
    """Raise the first problem found in one file, in the order of the in-memory checks."""
    label_roles = [("truth", acc.truth), ("pred", acc.pred)]
    if classes is None:
        missing = sum(check.nulls.get(r, 0) for r, _ in label_roles)
        if missing:
            role, name = next((r, n) for r, n in label_roles if r in check.first_null)
            raise _fail(f, missing_label_message(name, check.first_null[role], missing))
    if "fold" in check.first_null:
        raise _fail(f, f"column {FOLD!r} row {check.first_null['fold'] + 1}: missing value")
    if check.bad_weight is not None:
        row, value = check.bad_weight
        raise _fail(f, bad_weight_message(row, value))


def _locate_unknown(acc, files, role, bad_codes, labels, where, batch_rows) -> None:
    """Find the first row holding a label outside ``classes`` (a second, error-only pass).

    As in the in-memory check, the truth column of a file is searched before
    its predictions; the count is of the rows of that column in that file.
    """
    lab = acc.labels()
    allowed = {_key(v) for v in labels}
    for f in files:
        fmt = format_of(f)
        for which in ("truth", "pred"):
            codes, _, values = lab[which]
            shown = {int(c): v for c, v in zip(codes, values)}
            bad = np.array([c for c, v in shown.items() if _key(v) not in allowed], dtype=np.int64)
            name = acc.truth if which == "truth" else acc.pred
            extra = [] if where is None else [c for c in where.columns if c != name]
            first, count, rows = None, 0, 0
            for batch in _read(f, fmt, [name, *extra], [name, *extra], where, batch_rows):
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
                raise _fail(f, unknown_label_message(name, first[0], first[1], count, labels))


class _Progress:
    """Rows and files done, drawn on stderr with rich.progress."""

    def __init__(self, n_files: int):
        from rich.console import Console
        from rich.progress import (BarColumn, MofNCompleteColumn, Progress, TextColumn,
                                   TimeElapsedColumn)

        self.progress = Progress(TextColumn("files"), BarColumn(), MofNCompleteColumn(),
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


def tally_dataset(data, *, truth: str = ACTUAL, pred: str = PREDICTED, fold: str | None = "auto",
                  weight: str | None = None, classes=None, where=None,
                  skip_bad_files: bool = False, progress: bool | None = None,
                  engine: str = "local", scheduler=None, batch_rows: int = BATCH_ROWS
                  ) -> StreamResult:
    """Tally a dataset on this machine (streaming) or on a Dask cluster.

    Parameters
    ----------
    data : str, path-like or dask.dataframe.DataFrame
        A file, folder or glob of prediction tables; with ``engine="dask"``
        also a Dask DataFrame.
    truth, pred, fold, weight, classes, where, skip_bad_files, progress, batch_rows
        As in :func:`stream_tensor`.
    engine : {"local", "dask"}, default "local"
        ``"local"`` streams in this process; ``"dask"`` tallies each piece
        on the workers of a Dask cluster and sums the partial tallies in a
        tree (see :func:`foldcorr.sources.cluster.dask_tally`).
    scheduler : str, optional
        Address of a running Dask scheduler, e.g. ``"tcp://scheduler.example:8786"``.
        Without it a ``distributed.LocalCluster`` on 127.0.0.1 with one
        worker per core is started for the run and shut down after.

    Returns
    -------
    StreamResult
        Its ``tensor`` is the same whichever the engine.

    Raises
    ------
    InvalidInputError
        As :func:`stream_tensor`.
    OptionError
        On an unknown engine, or a scheduler without the dask engine.
    MissingDependencyError
        For ``engine="dask"`` without the ``dask`` extra.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted,split\\nb,b,test\\na,b,test\\na,a,train\\n")
    >>> r = tally_dataset(p, where='split == "test"')
    >>> r.tensor.values.tolist(), r.rows
    ([[0, 1], [0, 1]], 2)
    """
    from foldcorr.errors import OptionError, check_choice

    check_choice("engine", engine, ("local", "dask"))
    if engine == "local":
        if scheduler is not None:
            raise OptionError(f"`scheduler` needs engine 'dask'; got engine {engine!r}")
        if not isinstance(data, (str, Path)):
            raise OptionError(f"engine 'local' reads a file, folder or glob; got "
                              f"{type(data).__name__!r} (use engine 'dask' for a Dask DataFrame)")
        return stream_tensor(data, truth=truth, pred=pred, fold=fold, weight=weight,
                             classes=classes, where=where, skip_bad_files=skip_bad_files,
                             progress=progress, batch_rows=batch_rows)
    from foldcorr.sources.cluster import dask_tally

    return dask_tally(data, truth=truth, pred=pred, fold=fold, weight=weight, classes=classes,
                      where=where, skip_bad_files=skip_bad_files, progress=progress,
                      scheduler=scheduler, batch_rows=batch_rows)

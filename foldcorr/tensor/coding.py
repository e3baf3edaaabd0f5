"""Label coding: one rule for every source, from labels to integer codes and back.

A :class:`LabelCoder` gives each distinct value of a column a stable integer
code across batches and files (small non-negative integers are their own
codes); :func:`settle_labels` then types the values seen: label text stays the
text the source holds, fold text becomes numbers when every value reads so
(folds keep their numeric order). :func:`compared_labels`,
:func:`labels_as_text` and :func:`coerce_classes` make truth, predictions and
given class names agree on one type (text when either side is text, with a
:class:`~foldcorr.errors.LabelTypeWarning` when that text reads as numbers). Values arrive as Arrow
arrays (the in-memory columnar type of every reader); nothing here reads a
file, and pyarrow is imported only when an array is coded.
"""

from __future__ import annotations

import math
import re
import warnings

import numpy as np

from foldcorr.errors import LabelTypeWarning

__all__ = ["DIRECT_MAX", "BOOL_TEXT", "LabelCoder", "arrow_kind", "settle_labels",
           "labels_as_text", "coerce_classes", "label_key", "series_kind", "compared_labels",
           "reads_as_numbers", "arrow_text_codes"]

#: Integer labels in [0, DIRECT_MAX) are their own codes (no hashing).
DIRECT_MAX = 1 << 11
#: Texts read as booleans (as pandas reads a CSV column).
BOOL_TEXT = {"True": True, "TRUE": True, "true": True,
             "False": False, "FALSE": False, "false": False}

_INT_TEXT = re.compile(r"\s*[+-]?[0-9]+\s*")
_NUMBER_TEXT = re.compile(r"\s*[+-]?([0-9]+\.?[0-9]*|\.[0-9]+)([eE][+-]?[0-9]+)?\s*")


class LabelCoder:
    """Stable integer codes for the values of one column, across batches and files.

    Small non-negative integers are their own codes (no hashing) until a value
    outside that range appears; then the coder switches to a dictionary that
    keeps every code given so far.

    Parameters
    ----------
    text : bool
        The values are CSV text whose type is settled at the end (see
        :func:`settle_labels`).
    folds : bool, default False
        The column holds folds, not labels: its text becomes numbers when
        every value reads so, to keep the folds' numeric order. Label text is
        never changed.
    na : frozenset of str, default frozenset()
        Texts that count as missing (coded -1, as nulls).

    Examples
    --------
    >>> import pyarrow as pa
    >>> coder = LabelCoder(text=False)
    >>> coder.encode(pa.array(["b", "a", "b"]))[0].tolist(), coder.value_of([0, 1])
    ([0, 1, 0], ['b', 'a'])
    """

    def __init__(self, *, text: bool, folds: bool = False, na: frozenset = frozenset()):
        self.na = na              # texts that count as missing
        self.text = text          # values are CSV text; their type is settled at the end
        self.folds = folds        # fold text is typed (numeric order); label text never is
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
        self.kinds.add(arrow_kind(typ))
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
        lut = np.fromiter((-1 if isinstance(v, str) and v in self.na else self._code(v)
                           for v in enc.dictionary.to_pylist()),
                          dtype=np.int64, count=len(enc.dictionary))
        lut = np.append(lut, -1).astype(np.int32 if len(lut) < 1 << 31 else np.int64)
        idx = enc.indices
        nulls = None
        if idx.null_count:
            nulls = idx.is_null().to_numpy(zero_copy_only=False)
            idx = pc.fill_null(idx, -1)
        codes = lut[idx.to_numpy()]
        if self.na and (lut[:-1] < 0).any():
            nulls = codes < 0
        return codes, nulls

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

    def merge(self, other: LabelCoder) -> np.ndarray:
        """Take in the codes of ``other``; return the map from its codes to ours."""
        self.kinds |= other.kinds
        if self.direct and other.direct:
            self.size = max(self.size, other.size)
            return np.arange(other.size, dtype=np.int64)
        if self.direct:
            self._to_dictionary()
        return np.fromiter((self._code(v) for v in other.value_of(range(other.size))),
                           dtype=np.int64, count=other.size)


def arrow_kind(typ) -> str:
    """The kind of labels an Arrow type holds: bool, int, float, text, null or other.

    Parameters
    ----------
    typ : pyarrow.DataType
        A column type; a dictionary type is judged by its values.

    Returns
    -------
    str

    Examples
    --------
    >>> import pyarrow as pa
    >>> arrow_kind(pa.int32()), arrow_kind(pa.dictionary(pa.int32(), pa.string()))
    ('int', 'text')
    """
    import pyarrow as pa

    if pa.types.is_dictionary(typ):
        typ = typ.value_type
    checks = (("bool", pa.types.is_boolean), ("int", pa.types.is_integer),
              ("float", pa.types.is_floating), ("text", pa.types.is_string),
              ("text", pa.types.is_large_string), ("null", pa.types.is_null))
    return next((kind for kind, test in checks if test(typ)), "other")


def series_kind(column) -> str:
    """The kind of labels a pandas column holds, in the words of :func:`arrow_kind`.

    Examples
    --------
    >>> import pandas as pd
    >>> series_kind(pd.Series([1, 2])), series_kind(pd.Series([True])), series_kind(pd.Series(["a"]))
    ('int', 'bool', 'other')
    """
    import pandas as pd

    types = pd.api.types
    if types.is_bool_dtype(column):
        return "bool"
    if types.is_integer_dtype(column):
        return "int"
    return "float" if types.is_float_dtype(column) else "other"


def settle_labels(coder: LabelCoder, codes: np.ndarray) -> tuple[str, list]:
    """The column kind and typed values of the seen codes.

    CSV label text (``coder.text``) stays text as typed (``01``, ``1.0`` and
    ``1e3`` are three labels); CSV fold text (``coder.folds``) becomes
    booleans, integers or floats when every value reads so, keeping the
    folds' numeric order. Typed columns keep their type; integers beside
    floats become floats.

    Parameters
    ----------
    coder : LabelCoder
        The coder of the column.
    codes : numpy.ndarray
        The codes seen.

    Returns
    -------
    (str, list)
        The kind (``"bool"``, ``"int"``, ``"float"``, ``"text"`` or
        ``"object"``) and the values of ``codes`` in that kind.

    Examples
    --------
    >>> import pyarrow as pa
    >>> coder = LabelCoder(text=True)
    >>> codes, _ = coder.encode(pa.array(["2", "10", "02"]))
    >>> settle_labels(coder, sorted(set(codes.tolist())))
    ('text', ['2', '10', '02'])
    >>> folds = LabelCoder(text=True, folds=True)
    >>> codes, _ = folds.encode(pa.array(["2", "10", "2"]))
    >>> settle_labels(folds, sorted(set(codes.tolist())))
    ('int', [2, 10])
    """
    raw = coder.value_of(codes)
    if coder.text and not coder.folds:
        return "text", raw
    if coder.text:
        if all(v in BOOL_TEXT for v in raw):
            return "bool", [BOOL_TEXT[v] for v in raw]
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


def labels_as_text(kind: str, values: list) -> list:
    """Labels as text, for a numeric column compared with a text column.

    Every value is written with ``str``, as the source typed it: the float
    ``1.0`` reads ``"1.0"`` (never the text ``"1"``), the integer ``7`` reads
    ``"7"`` (never ``"007"``).

    Parameters
    ----------
    kind : str
        The kind of the column (see :func:`arrow_kind`).
    values : list
        Its values, without missing ones.

    Returns
    -------
    list of str

    Examples
    --------
    >>> labels_as_text("float", [1.0, 2.5]), labels_as_text("int", [3])
    (['1.0', '2.5'], ['3'])
    """
    return [v if isinstance(v, str) else str(v) for v in values]


def reads_as_numbers(values) -> bool:
    """Whether every text value reads as a number (``01``, ``1e3``, ``-2.5``).

    Examples
    --------
    >>> reads_as_numbers(["01", "1e3", "-2.5"]), reads_as_numbers(["1", "a"]), reads_as_numbers([])
    (True, False, False)
    """
    values = list(values)
    return bool(values) and all(isinstance(v, str) and _NUMBER_TEXT.fullmatch(v)
                                for v in values)


def compared_labels(names: tuple, kinds: tuple, values: tuple) -> tuple[str, list, list]:
    """Truth and predicted labels in one type, as they are compared.

    Text when either side is text (numbers written with :func:`labels_as_text`),
    with a :class:`~foldcorr.errors.LabelTypeWarning` naming the columns when
    the text side reads as numbers; floats when both are numbers and one is a
    float; otherwise the values as they are.

    Parameters
    ----------
    names : (str, str)
        The truth and prediction column names (for the warning).
    kinds : (str, str)
        Their kinds (see :func:`arrow_kind`; ``"text"`` or ``"object"`` for text).
    values : (list, list)
        Their distinct values, without missing ones.

    Returns
    -------
    (str or None, list, list)
        The common kind (None when the kinds are kept) and both value lists.

    Examples
    --------
    >>> import warnings
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     out = compared_labels(("actual", "predicted"), ("int", "text"), ([1, 2], ["01", "2"]))
    >>> out, str(caught[0].message)  # doctest: +NORMALIZE_WHITESPACE
    (('text', ['1', '2'], ['01', '2']), "column 'actual' holds numbers and column 'predicted'
    text that reads as numbers; labels are compared as text, so 1 and '01' are different
    classes (write both columns in one type to compare them as numbers)")
    """
    numeric = [k in ("int", "float") for k in kinds]
    if numeric[0] != numeric[1]:
        text_side = 0 if numeric[1] else 1
        if reads_as_numbers(values[text_side]):
            num, txt = names[1 - text_side], names[text_side]
            warnings.warn(
                f"column {num!r} holds numbers and column {txt!r} text that reads as numbers; "
                "labels are compared as text, so 1 and '01' are different classes (write both "
                "columns in one type to compare them as numbers)", LabelTypeWarning, stacklevel=2)
        return "text", labels_as_text(kinds[0], values[0]), labels_as_text(kinds[1], values[1])
    if all(numeric) and "float" in kinds:
        return "float", [float(v) for v in values[0]], [float(v) for v in values[1]]
    return None, list(values[0]), list(values[1])


def label_key(value):
    """A dict key that keeps 1, 1.0 and True together (as pandas factorises them),
    but NaN equal to NaN.

    Examples
    --------
    >>> {label_key(1): "one"}[label_key(1.0)], label_key(float("nan")) == label_key(float("nan"))
    ('one', True)
    """
    if isinstance(value, float) and math.isnan(value):
        return ("nan",)
    return value


def coerce_classes(classes, kind: str) -> tuple:
    """Class names given as text, in the type of a truth column of ``kind``.

    Names that do not read as that type are kept as given (they are then
    reported as labels outside the classes).

    Parameters
    ----------
    classes : sequence
        Class names, often text from the command line.
    kind : str
        The kind of the truth column (see :func:`arrow_kind`).

    Returns
    -------
    tuple

    Examples
    --------
    >>> coerce_classes(["2", "10"], "int"), coerce_classes(["a"], "int"), coerce_classes(["1"], "text")
    ((2, 10), ('a',), ('1',))
    """
    if kind in ("int", "float"):
        caster = int if kind == "int" else float
        try:
            return tuple(caster(c) for c in classes)
        except (TypeError, ValueError):
            return tuple(classes)
    return tuple(classes)


def arrow_text_codes(arrays) -> tuple[list, list] | None:
    """Codes over one sorted class list when every label column holds Arrow text, else None.

    Arrow-backed text (a pandas column of ``pd.ArrowDtype(pa.string())`` or
    ``"string[pyarrow]"``, the default for text read from Parquet or CSV with
    Arrow, or a pyarrow array) is dictionary-coded by Arrow itself, so no
    Python string is made per row; nulls get the code -1. Label text is kept
    as it is.

    Examples
    --------
    >>> import pandas as pd, pyarrow as pa
    >>> truth = pd.Series(["b", "a", None], dtype=pd.ArrowDtype(pa.string()))
    >>> codes, labels = arrow_text_codes([truth, pa.array(["a", "a", "c"])])
    >>> [c.tolist() for c in codes], labels
    ([[1, 0, -1], [0, 0, 2]], ['a', 'b', 'c'])
    >>> arrow_text_codes([["a"], ["b"]]) is None
    True
    """
    columns = [_arrow_text(values) for values in arrays]
    if any(c is None for c in columns):
        return None
    import pyarrow as pa
    import pyarrow.compute as pc

    encoded = [pc.dictionary_encode(c) for c in columns]  # each column hashed once, by Arrow
    encoded = [e.combine_chunks() if isinstance(e, pa.ChunkedArray) else e for e in encoded]
    labels = sorted(set().union(*(e.dictionary.to_pylist() for e in encoded)))
    union = pa.array(labels, type=pa.large_string())
    codes = []
    for enc in encoded:
        lut = pc.index_in(enc.dictionary.cast(pa.large_string()), value_set=union).to_numpy()
        lut = np.append(lut.astype(np.int64), -1)  # the null index -1 picks the last entry
        codes.append(lut[pc.fill_null(enc.indices, -1).to_numpy()])
    return codes, labels


def _arrow_text(values):
    """The Arrow array (or chunked array) of a text column held by Arrow, else None.

    Columns of other types are told apart without importing pyarrow.
    """
    dtype = getattr(values, "dtype", None)
    held_by_arrow = "pyarrow" in type(values).__module__ or "pyarrow" in str(dtype)
    if not held_by_arrow:
        return None
    import pyarrow as pa

    try:
        arr = pa.array(values)  # zero-copy through the __arrow_array__ protocol
    except (pa.ArrowInvalid, pa.ArrowTypeError, TypeError):
        return None
    typ = arr.type  # chunks stay apart: their dictionary codes are combined, not their text
    return arr if pa.types.is_string(typ) or pa.types.is_large_string(typ) else None

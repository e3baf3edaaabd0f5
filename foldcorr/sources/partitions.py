"""Hive partitions: ``key=value`` folders read as columns of every row below them.

A dataset written by Spark, Dask or Arrow as ``runs/fold=3/part-0.parquet``
holds ``fold`` 3 in every row of that file. :func:`hive_partitions` reads the
folders between the dataset's root and each file, :func:`typed_partitions`
types the values alike over the dataset, :func:`excluded` prunes a file whose
partition values fail the parts of a filter that name only them (the file is
never opened), the parts naming none of them are pushed down to the file's
reader (:func:`conjuncts`), and :func:`with_partitions` adds the values to
each record batch, which the whole filter then checks.
"""

from __future__ import annotations

import glob as _glob
import re
from pathlib import Path

from foldcorr.sources.locations import RemoteFile, is_url
from foldcorr.sources.where import Where

__all__ = ["HIVE_NULL", "hive_partitions", "partition_types", "typed_partitions", "conjuncts",
           "excluded", "with_partitions"]

_HIVE = re.compile(r"^([A-Za-z_][A-Za-z0-9_.]*)=(.*)$")
#: The folder value hive writers give a missing partition value.
HIVE_NULL = "__HIVE_DEFAULT_PARTITION__"


def _root(source) -> str | None:
    """The dataset's root folder, as text, below which partition folders count."""
    text = str(source)
    if is_url(text):
        return None  # a remote file knows its root (RemoteFile.relative)
    if _glob.has_magic(text):
        cut = min(text.find(ch) for ch in "*?[" if ch in text)
        prefix = text[:cut].rsplit("/", 1)[0] if "/" in text[:cut] else ""
        return str(Path(prefix)) if prefix else ""
    if isinstance(source, (str, Path)) and Path(source).is_dir():
        return str(Path(source))
    return None


def hive_partitions(source, files) -> dict:
    """The ``key=value`` folders between a dataset's root and each of its files.

    Parameters
    ----------
    source : str or path-like
        The dataset as given (a folder, a glob or a URL; a single file has no
        partitions).
    files : list
        Its files.

    Returns
    -------
    dict
        File -> {column: value as text, or None for a missing value}; files
        without partition folders are left out.

    Examples
    --------
    >>> files = [Path("runs/fold=0/a.parquet"), Path("runs/fold=1/b.parquet")]
    >>> hive_partitions("runs/*/*.parquet", files)[files[1]]
    {'fold': '1'}
    """
    root = _root(source)
    if root is None and not any(isinstance(f, RemoteFile) for f in files):
        return {}
    out = {}
    for f in files:
        if isinstance(f, RemoteFile):
            rel = f.relative
        else:
            text = str(f)
            rel = text[len(root):] if text.startswith(root) else ""
        parts = {}
        for segment in rel.strip("/").split("/")[:-1]:
            m = _HIVE.match(segment)
            if m:
                parts[m.group(1)] = None if m.group(2) == HIVE_NULL else m.group(2)
        if parts:
            out[f] = parts
    return out


def partition_types(partitions: dict, text: bool) -> dict:
    """The Arrow type of each partition column: int64 when every value is a whole number.

    With CSV text (``text``) every partition column is text, settled later
    with the labels, as a column of the file would be.

    Examples
    --------
    >>> partition_types({"a": {"fold": "0"}, "b": {"fold": "1", "split": "test"}}, False)
    {'fold': DataType(int64), 'split': DataType(string)}
    """
    import pyarrow as pa

    values: dict = {}
    for parts in partitions.values():
        for col, value in parts.items():
            values.setdefault(col, []).append(value)
    whole = re.compile(r"^[+-]?[0-9]+$")
    return {col: pa.int64() if not text and all(v is None or whole.match(v) for v in vs)
            else pa.string() for col, vs in values.items()}


def typed_partitions(path, files, text: bool = False) -> dict:
    """File -> {partition column: ``pyarrow.Scalar``}, typed alike over the dataset.

    Whole numbers are int64 (text for CSV files, ``text``, whose labels are
    settled later); see :func:`partition_types`.

    Examples
    --------
    >>> files = [Path("runs/fold=0/a.parquet"), Path("runs/fold=1/b.parquet")]
    >>> typed_partitions("runs/*/*.parquet", files)[files[1]]
    {'fold': <pyarrow.Int64Scalar: 1>}
    """
    import pyarrow as pa

    raw = hive_partitions(path, files)
    if not raw:
        return {}
    types = partition_types(raw, text)
    return {f: {c: pa.scalar(None if v is None else (int(v) if types[c] == pa.int64() else v),
                             types[c]) for c, v in parts.items()}
            for f, parts in raw.items()}


def conjuncts(where, parts, *, naming: bool) -> object:
    """The ``and``-joined parts of a filter that name partition columns only (``naming``) or
    none of them (not ``naming``), as one filter; None when there are none.

    A filter that is not an ``and`` chain is one part. An Arrow expression
    cannot be split: it counts as naming partition columns when it reads any.

    Examples
    --------
    >>> from foldcorr.sources.where import as_where
    >>> w = as_where("fold != 1 and split == 'test'")
    >>> conjuncts(w, {"fold": None}, naming=True).tree
    ('cmp', 'fold', '!=', 1)
    >>> conjuncts(w, {"fold": None}, naming=False).tree
    ('cmp', 'split', '==', 'test')
    """
    if where is None:
        return None
    names = set(parts)

    def fits(columns) -> bool:
        return set(columns) <= names if naming else not set(columns) & names

    if not isinstance(where, Where):
        return where if fits(where.columns) else None
    nodes = where.tree[1:] if where.tree[0] == "and" else (where.tree,)
    keep = [n for n in nodes if fits(Where(where.text, n).columns)]
    if not keep:
        return None
    return Where(where.text, keep[0] if len(keep) == 1 else ("and", *keep))


def excluded(where, parts) -> bool:
    """Whether a file's partition values alone exclude it: the parts of the filter that name
    only partition columns (see :func:`conjuncts`) hold for no row of it.

    Examples
    --------
    >>> import pyarrow as pa
    >>> from foldcorr.sources.where import as_where
    >>> excluded(as_where("fold == 1"), {"fold": pa.scalar(2)})
    True
    >>> excluded(as_where("fold == 1 and split == 'test'"), {"fold": pa.scalar(2)})
    True
    >>> excluded(as_where("fold == 1 or split == 'test'"), {"fold": pa.scalar(2)})
    False
    """
    import pyarrow as pa

    own = conjuncts(where, parts or {}, naming=True)
    if own is None or not parts:
        return False
    table = pa.table({c: pa.array([v.as_py()], v.type) for c, v in parts.items()})
    return table.filter(own.expression(table.schema)).num_rows == 0


def with_partitions(batch, parts: dict, columns, where=None):
    """A batch with partition columns added as constants, then filtered by ``where``.

    Examples
    --------
    >>> import pyarrow as pa
    >>> b = pa.record_batch({"actual": ["a", "b"]})
    >>> out = with_partitions(b, {"fold": pa.scalar(3)}, ["actual", "fold"])
    >>> out.column("fold").to_pylist()
    [3, 3]
    """
    import pyarrow as pa

    arrays, names = [], []
    for col in columns:
        if col in parts:
            arrays.append(pa.array([parts[col].as_py()] * batch.num_rows, parts[col].type))
        else:
            arrays.append(batch.column(col))
        names.append(col)
    table = pa.Table.from_arrays(arrays, names=names)
    if where is not None:
        table = table.filter(where.expression(table.schema))
    return table

"""Tables already in memory, read like one file of a dataset.

A pandas or polars DataFrame, an Arrow table, record batch, record-batch
reader or dataset, or a Dask DataFrame is wrapped in a :class:`MemoryTable`;
the format object :class:`foldcorr.sources.formats.MemoryFormat` reads its
schema and its record batches, so the stream engine counts it with the same
checks and messages as a file. An Arrow dataset gets the filter pushed down.
"""

from __future__ import annotations

__all__ = ["MemoryTable", "memory_table", "is_memory_table"]


def _kind(obj) -> str | None:
    """The kind of an in-memory table, or None when ``obj`` is not one."""
    module = type(obj).__module__.split(".")[0]
    name = type(obj).__name__
    if module == "pandas" and name == "DataFrame":
        return "pandas DataFrame"
    if module == "polars" and name in ("DataFrame", "LazyFrame"):
        return "polars DataFrame"
    if module == "dask" and hasattr(obj, "to_delayed") and hasattr(obj, "columns"):
        return "dask DataFrame"
    if module == "pyarrow":
        import pyarrow as pa
        import pyarrow.dataset as ds

        for typ, kind in ((pa.Table, "Arrow table"), (pa.RecordBatch, "Arrow record batch"),
                          (pa.RecordBatchReader, "Arrow record batch reader"),
                          (ds.Dataset, "Arrow dataset")):
            if isinstance(obj, typ):
                return kind
    return None


def is_memory_table(obj) -> bool:
    """Whether ``obj`` is a table in memory that :func:`memory_table` wraps.

    Examples
    --------
    >>> import pandas as pd
    >>> is_memory_table(pd.DataFrame({"a": [1]})), is_memory_table("p.csv")
    (True, False)
    """
    return isinstance(obj, MemoryTable) or _kind(obj) is not None


class MemoryTable:
    """A table in memory, standing where a file of a dataset stands.

    Parameters
    ----------
    obj : object
        The table (see :func:`is_memory_table`).
    kind : str
        What it is, e.g. ``"pandas DataFrame"``; its name in messages.
    """

    def __init__(self, obj, kind: str):
        self.obj, self.kind = obj, kind
        self.suffix = ""

    @property
    def name(self) -> str:
        """The table's name in messages and provenance."""
        return self.kind

    def __str__(self) -> str:
        return self.kind

    def __repr__(self) -> str:
        return f"MemoryTable({self.kind!r})"

    def __lt__(self, other) -> bool:
        return str(self) < str(other)

    def schema(self):
        """The Arrow schema of the table."""
        import pyarrow as pa

        obj = self.obj
        if self.kind == "pandas DataFrame":
            return pa.Schema.from_pandas(obj.head(0), preserve_index=False)
        if self.kind == "dask DataFrame":
            return pa.Schema.from_pandas(obj._meta, preserve_index=False)
        if self.kind == "polars DataFrame":
            return _polars(obj).head(0).to_arrow().schema
        return obj.schema

    def batches(self, columns, where, batch_rows: int):
        """Record batches of ``columns`` filtered by ``where`` (pushed down for a dataset)."""
        import pyarrow as pa

        if self.kind == "Arrow dataset":
            expr = None if where is None else where.expression(self.obj.schema)
            yield from self.obj.to_batches(columns=columns, filter=expr, batch_size=batch_rows)
            return
        for table in self._tables():
            table = table.select(columns) if isinstance(table, pa.Table) else \
                pa.Table.from_batches([table]).select(columns)
            if where is not None:
                table = table.filter(where.expression(table.schema))
            yield from table.to_batches(max_chunksize=batch_rows)

    def _tables(self):
        import pyarrow as pa

        obj = self.obj
        if self.kind == "pandas DataFrame":
            yield pa.Table.from_pandas(obj, preserve_index=False)
        elif self.kind == "polars DataFrame":
            yield _polars(obj).to_arrow()
        elif self.kind == "dask DataFrame":
            for part in obj.to_delayed():
                yield pa.Table.from_pandas(part.compute(), preserve_index=False)
        elif self.kind == "Arrow record batch":
            yield pa.Table.from_batches([obj])
        elif self.kind == "Arrow record batch reader":
            yield from obj  # read once, batch by batch
        else:
            yield obj


def _polars(obj):
    return obj.collect() if type(obj).__name__ == "LazyFrame" else obj


def memory_table(obj) -> MemoryTable:
    """Wrap a table in memory for the stream engine.

    Parameters
    ----------
    obj : pandas.DataFrame, polars.DataFrame, pyarrow.Table, pyarrow.RecordBatch,
          pyarrow.RecordBatchReader, pyarrow.dataset.Dataset or dask.dataframe.DataFrame

    Returns
    -------
    MemoryTable

    Raises
    ------
    OptionError
        For any other object, naming its type and the kinds accepted.

    Examples
    --------
    >>> import pyarrow as pa
    >>> memory_table(pa.table({"actual": ["a"]})).name
    'Arrow table'
    """
    from foldcorr.errors import OptionError

    if isinstance(obj, MemoryTable):
        return obj
    kind = _kind(obj)
    if kind is None:
        raise OptionError(
            f"cannot read a {type(obj).__name__!r} as a table; expected a file, folder, glob or "
            f"URL, a pandas or polars DataFrame, an Arrow table, record batch, record batch "
            f"reader or dataset, or a Dask DataFrame")
    return MemoryTable(obj, kind)

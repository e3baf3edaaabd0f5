"""The one way in: any source -> a confusion tensor.

:func:`load` makes the one decision of the sources layer: a file of counts
already tallied (a saved evaluation, a counts matrix; see
:data:`foldcorr.sources.formats.FORMATS`) is read as it is, and anything else is
a dataset of prediction tables tallied by an engine (:func:`tally_dataset`:
streamed in this process, or on a Dask cluster).
"""

from __future__ import annotations

import os
from typing import TYPE_CHECKING, Any

from foldcorr.errors import OptionError, check_choice
from foldcorr.sources.formats import FORMATS, FileFormat
from foldcorr.sources.locations import BytesFile
from foldcorr.sources.matrix import reorder_classes
from foldcorr.sources.memory import memory_table
from foldcorr.sources.reading import BATCH_ROWS
from foldcorr.sources.stream import StreamResult, stream_tensor
from foldcorr.sources.tables import TableSpec
from foldcorr.tensor import ACTUAL, PREDICTED

if TYPE_CHECKING:
    from collections.abc import Sequence

    import pyarrow.compute as pc
    import xarray as xr
    from numpy.typing import ArrayLike

    from foldcorr.sources.where import Where

__all__ = ["load", "load_tensor", "tally_dataset", "counts_format"]

ENGINES = ("local", "dask")


def counts_format(source, *, matrix: bool = False) -> FileFormat | None:
    """The format of ``source`` when it is one file of counts already tallied, else None.

    Examples
    --------
    >>> counts_format("run.nc").name, counts_format("m.csv", matrix=True).name
    ('netcdf', 'matrix')
    >>> counts_format("p.csv") is None, counts_format("runs/") is None
    (True, True)
    """
    if not isinstance(source, (str, os.PathLike)):
        return None
    fmt = next((f for f in FORMATS if f.can_open(source, matrix=matrix)), None)
    return None if fmt is None or fmt.rows else fmt


def load(source: Any, *, truth: str = ACTUAL, pred: str = PREDICTED,
         fold: str | None = "auto",
         weight: str | None = None, classes: ArrayLike | None = None,
         where: str | Where | pc.Expression | None = None,
         matrix: bool = False, engine: str = "local", scheduler: str | None = None,
         skip_bad_files: bool = False, progress: bool | None = False,
         count: str | None = None, na_values: Sequence[str] = ()) -> xr.DataArray:
    """Read any source into a confusion tensor.

    Prediction tables are streamed batch by batch (see
    :func:`foldcorr.sources.stream.stream_tensor`): memory is bounded by the
    batch size and the tensor, not by the number of rows, and the result is
    the tensor :func:`foldcorr.tensor.tally_frame` gives on the whole table.

    Parameters
    ----------
    source : str, path-like, URL, ``"-"`` or a table in memory
        A prediction table, a folder or a glob of them, local or at a URL
        (``s3://``, ``gs://``, ``file://``, ``memory://``, any fsspec
        protocol; ``key=value`` folders are columns, see
        :mod:`foldcorr.sources.partitions`); ``"-"`` for standard input; a
        pandas or polars DataFrame, an Arrow table, record batch reader or
        dataset, or a Dask DataFrame (see :mod:`foldcorr.sources.memory`); a
        counts matrix CSV when ``matrix`` is true; a saved evaluation
        (``.nc``, see :mod:`foldcorr.sources.saved`), which stands wherever a
        table can.
    truth, pred : str
        Columns of actual and predicted labels.
    fold : str or None, default "auto"
        Fold column; ``"auto"`` uses ``fold`` when the table has it.
    weight : str, optional
        Column of sample weights.
    classes : sequence, optional
        Fixed class order; labels outside it are an error. With a counts
        matrix or a saved evaluation, a new order of its classes.
    where : str, Where or pyarrow.compute.Expression, optional
        Row filter, e.g. ``'split == "test"'`` (see
        :func:`foldcorr.sources.where.parse_where`).
    matrix : bool, default False
        Read ``source`` as a counts matrix (column options are ignored).
    engine : {"local", "dask"}
        Where the tally runs (see :func:`tally_dataset`).
    scheduler : str, optional
        Address of a Dask scheduler (engine "dask").
    skip_bad_files : bool, default False
        Skip unreadable files of a dataset (listed in ``attrs["skipped_files"]``).
    progress : bool or None, default False
        Progress bar on stderr; None shows it when stderr is a terminal.
    count : str, optional
        Column of whole counts: rows already aggregated (see
        :mod:`foldcorr.sources.counts`); the tensor stays int64.
    na_values : sequence of str, default ()
        Label texts that count as missing, beside the empty CSV cell (so
        ``NA`` is a class unless named here); a missing label is an error
        naming its row.

    Returns
    -------
    xarray.DataArray
        The tensor, with ``source`` and the columns used in ``attrs``.

    Raises
    ------
    InvalidInputError
        On any problem with the file, naming file, column and row.
    OptionError
        When a table-only option is given with a saved evaluation (see
        :func:`foldcorr.sources.saved.check_saved_options`), or on a bad engine.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("actual,predicted,fold\\na,a,1\\nb,a,1\\nb,b,2\\n")
    >>> load(p).dims
    ('fold', 'actual', 'predicted')
    >>> load(p, fold=None, classes=["b", "a"]).values.tolist()
    [[1, 1], [0, 1]]
    """
    fmt = counts_format(source, matrix=matrix)
    if fmt is not None and na_values:
        raise OptionError(f"`na_values` applies to prediction tables, not to a {fmt.title}")
    if fmt is not None:
        spec = TableSpec(truth=truth, pred=pred, fold=fold, weight=weight, classes=classes)
        fmt.check_options(source, spec, matrix=matrix, where=where, count=count,
                          skip_bad_files=skip_bad_files, engine=engine, scheduler=scheduler)
        t = fmt.tensor(source)
        return t if classes is None else reorder_classes(source, t, classes, fmt.title)
    return tally_dataset(source, truth=truth, pred=pred, fold=fold, weight=weight,
                         classes=classes, where=where, skip_bad_files=skip_bad_files,
                         progress=progress, engine=engine, scheduler=scheduler,
                         count=count, na_values=na_values).tensor


def load_tensor(path: Any, spec: TableSpec = TableSpec(), **options: Any) -> xr.DataArray:
    """:func:`load` with the column roles given as a :class:`~foldcorr.sources.tables.TableSpec`.

    The name the command line uses; ``options`` are those of :func:`load`
    (``matrix``, ``where``, ``skip_bad_files``, ``progress``, ``engine``,
    ``scheduler``, ``count``).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = p.write_text("label,guess\\na,a\\nb,a\\n")
    >>> load_tensor(p, TableSpec(truth="label", pred="guess")).values.tolist()
    [[1, 0], [1, 0]]
    """
    return load(path, truth=spec.truth, pred=spec.pred, fold=spec.fold, weight=spec.weight,
                classes=spec.classes, **options)


def tally_dataset(data: Any, *, truth: str = ACTUAL, pred: str = PREDICTED,
                  fold: str | None = "auto", weight: str | None = None,
                  classes: ArrayLike | None = None,
                  where: str | Where | pc.Expression | None = None,
                  skip_bad_files: bool = False, progress: bool | None = None,
                  engine: str = "local", scheduler: str | None = None,
                  batch_rows: int = BATCH_ROWS,
                  count: str | None = None, na_values: Sequence[str] = ()) -> StreamResult:
    """Tally a dataset on this machine (streaming) or on a Dask cluster.

    Parameters
    ----------
    data : str, path-like, URL, ``"-"`` or a table in memory
        A file, folder or glob of prediction tables, local or at a URL;
        standard input (``"-"``); or a table in memory (see :func:`load`).
    truth, pred, fold, weight, classes, where, skip_bad_files, progress, batch_rows, count
    na_values
        As in :func:`foldcorr.sources.stream.stream_tensor`.
    engine : {"local", "dask"}, default "local"
        ``"local"`` streams in this process (a Dask DataFrame partition by
        partition); ``"dask"`` tallies each piece on the workers of a Dask
        cluster and sums the partial tallies with Dask's tree reduction (see
        :func:`foldcorr.sources.cluster.dask_tally`).
    scheduler : str or distributed.Client, optional
        Address of a running Dask scheduler, e.g. ``"tcp://scheduler.example:8786"``.
        Without it the running Dask client is used (``distributed.get_client``);
        without one, a ``distributed.LocalCluster`` on 127.0.0.1 with one
        worker per core is started for the run and shut down after.

    Returns
    -------
    StreamResult
        Its ``tensor`` is the same whichever the engine.

    Raises
    ------
    InvalidInputError
        As :func:`foldcorr.sources.stream.stream_tensor`.
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
    check_choice("engine", engine, ENGINES)
    if engine == "local":
        if scheduler is not None:
            raise OptionError(f"`scheduler` needs engine 'dask'; got engine {engine!r}")
        if not isinstance(data, (str, os.PathLike, BytesFile)):
            data = memory_table(data)
        return stream_tensor(data, truth=truth, pred=pred, fold=fold, weight=weight,
                             classes=classes, where=where, skip_bad_files=skip_bad_files,
                             progress=progress, batch_rows=batch_rows, count=count,
                             na_values=na_values)
    from foldcorr.sources.cluster import dask_tally

    return dask_tally(data, truth=truth, pred=pred, fold=fold, weight=weight, classes=classes,
                      where=where, skip_bad_files=skip_bad_files, progress=progress,
                      scheduler=scheduler, batch_rows=batch_rows, count=count,
                      na_values=na_values)

"""The Dask engine: partial tallies on the workers of a cluster, summed in a tree.

Each piece of the dataset (a run of files, or a partition of a Dask DataFrame)
is tallied on a worker into a small count array over its own label codes
(folds x K x K, a :class:`foldcorr.tensor.accumulator.StreamTally`); the pieces
are a ``dask.bag`` whose tree reduction (``Bag.reduction``, fan-in
:data:`FAN_IN`) merges them, and the labels are settled once on the last worker
with the same code as the local engine. Only the tensor comes back to the
client, so the result equals the local one.

The cluster is the caller's when there is one: a client or scheduler address
given, else the Dask client already running in this process
(``distributed.get_client``); only without either is a local cluster started
for the run, its workers' logs kept off the terminal.

Needs the ``dask`` extra (``pip install 'foldcorr[dask]'``): ``dask[dataframe]``
and ``distributed``, imported only through :func:`foldcorr.errors.require`.
"""

from __future__ import annotations

import logging
import os
from pathlib import Path

from foldcorr._version import __version__
from foldcorr.errors import EngineError, FoldcorrError, InvalidInputError, OptionError, require
from foldcorr.sources.counts import as_counts, whole_counts
from foldcorr.sources.locations import size_of
from foldcorr.sources.reading import BATCH_ROWS, Progress, resolve_paths
from foldcorr.sources.stream import (
    FilePlan,
    StreamResult,
    finish_tally,
    counted_plan,
    plan_files,
    raise_checks,
    tally_files,
)
from foldcorr.sources.where import as_where
from foldcorr.tensor import ACTUAL, PREDICTED
from foldcorr.tensor.accumulator import BatchCheck

__all__ = ["dask_tally", "running_client", "FAN_IN"]

#: Partial tallies merged per task in the reduction tree.
FAN_IN = 8

#: Pieces of work per worker: each is a run of consecutive files, so that few
#: partial tallies (folds x K x K each) travel between workers.
PIECES_PER_WORKER = 2

#: How long to wait for a scheduler given by address.
CONNECT_TIMEOUT = 10.0

_PURPOSE = "the Dask engine (--engine dask)"


def dask_tally(data, *, truth: str = ACTUAL, pred: str = PREDICTED, fold: str | None = "auto",
               weight: str | None = None, classes=None, where=None,
               skip_bad_files: bool = False, progress: bool | None = None,
               scheduler=None, batch_rows: int = BATCH_ROWS,
               count: str | None = None, na_values=()) -> StreamResult:
    """Tally a dataset, or a Dask DataFrame, on a Dask cluster.

    Parameters
    ----------
    data : str, path-like or dask.dataframe.DataFrame
        A file, folder or glob of prediction tables (the paths must be
        readable by every worker, e.g. on a shared file system), or a Dask
        DataFrame with the named columns.
    truth, pred, fold, weight, classes, where, skip_bad_files, progress, batch_rows, count
        As in :func:`foldcorr.sources.stream.stream_tensor`.
    scheduler : str or distributed.Client, optional
        Address of a running scheduler (``"tcp://host:8786"``) or a client.
        Without it, the client already running in this process, if any;
        else a ``distributed.LocalCluster`` on 127.0.0.1 with one
        single-threaded worker process per core runs for this call only.

    Returns
    -------
    StreamResult

    Raises
    ------
    InvalidInputError
        As the local engine; for a Dask DataFrame, rows are counted within
        the partition, which the message names.
    EngineError
        When the run fails (a worker lost more often than the scheduler
        retries, the scheduler unreachable); no tensor is returned then.
    MissingDependencyError
        Without the ``dask`` extra.

    Notes
    -----
    The scheduler retries a task whose worker died (``distributed``'s
    ``scheduler.allowed-failures``, 3 by default); a task that kills its
    workers more often fails the run. Partial tallies are never reported:
    the result exists only when every piece was counted.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "a.csv").write_text("actual,predicted\\nx,x\\ny,x\\n")
    >>> from distributed import Client, LocalCluster               # doctest: +SKIP
    >>> with LocalCluster(n_workers=1, host="127.0.0.1") as c, Client(c) as client:  # doctest: +SKIP
    ...     dask_tally(d, scheduler=client).tensor.values.tolist()
    [[1, 0], [1, 0]]
    """
    distributed = require("distributed", extra="dask", purpose=_PURPOSE)
    where = as_where(where)
    if count is not None and weight is not None:
        raise OptionError(f"`weight` and `count` cannot both be given; got weight {weight!r} "
                          f"and count {count!r}")
    client, cluster, owned = _connect(distributed, scheduler)
    try:
        if _is_dask_frame(data):
            return _run_frame(client, data, truth, pred, fold, weight, classes, where, progress,
                              count, na_values)
        return _run_files(client, data, truth, pred, fold, weight, classes, where,
                          skip_bad_files, progress, batch_rows, count, na_values)
    except FoldcorrError:
        raise
    except Exception as exc:  # a lost worker, a closed connection, a cancelled task
        raise EngineError(f"the Dask run failed and produced no tensor: "
                          f"{type(exc).__name__}: {_first_line(exc)}") from None
    finally:
        if owned:
            client.close()
        if cluster is not None:
            cluster.close()


def _first_line(exc: BaseException) -> str:
    lines = str(exc).strip().splitlines()
    return lines[0] if lines else "no message"


def running_client():
    """The Dask client already running in this process, or None.

    Examples
    --------
    >>> client = running_client()
    >>> client is None or client.status == "running"
    True
    """
    distributed = require("distributed", extra="dask", purpose=_PURPOSE)
    try:
        client = distributed.get_client()
    except ValueError:
        return None
    return client if client.status == "running" else None


def _connect(distributed, scheduler):
    """(client, cluster started here or None, whether the client is ours to close)."""
    if isinstance(scheduler, distributed.Client):
        return scheduler, None, False
    if scheduler is not None:
        try:
            _probe(str(scheduler))
            return distributed.Client(scheduler, timeout=CONNECT_TIMEOUT), None, True
        except (OSError, TimeoutError) as exc:
            raise EngineError(f"cannot reach the Dask scheduler at {scheduler!r}: "
                              f"{_first_line(exc) or type(exc).__name__}") from None
    client = running_client()
    if client is not None:
        return client, None, False
    cluster = distributed.LocalCluster(n_workers=os.cpu_count() or 1, threads_per_worker=1,
                                       processes=True, host="127.0.0.1",
                                       dashboard_address="127.0.0.1:0",
                                       silence_logs=logging.CRITICAL,
                                       scheduler_kwargs={"dashboard": False})
    return distributed.Client(cluster, set_as_default=False), cluster, True


def _probe(address: str) -> None:
    """Open and close a TCP connection to a ``tcp://host:port`` scheduler (fails fast)."""
    import socket
    from urllib.parse import urlsplit

    if not address.startswith("tcp://"):
        return
    parts = urlsplit(address)
    with socket.create_connection((parts.hostname, parts.port or 8786), timeout=CONNECT_TIMEOUT):
        pass


def _is_dask_frame(data) -> bool:
    return type(data).__module__.startswith("dask") and hasattr(data, "to_delayed")


def _run_files(client, path, truth, pred, fold, weight, classes, where, skip_bad_files,
               progress, batch_rows, count=None, na_values=()) -> StreamResult:
    import sys

    import dask.bag as db
    from distributed import as_completed, futures_of

    if truth == pred:
        raise InvalidInputError(f"truth and pred name the same column {truth!r}")
    files = resolve_paths(path)
    plan = counted_plan(plan_files(path, files, truth, pred, fold, weight or count, where,
                                   skip_bad_files), weight, count, na_values)
    workers = max(1, len(client.scheduler_info().get("workers", {})))
    groups = _groups(plan.files, PIECES_PER_WORKER * workers)
    pieces = db.from_sequence(groups, npartitions=len(groups)).map(
        _files_piece, plan=plan, classes=classes, batch_rows=batch_rows, skip=skip_bad_files)
    show = sys.stderr.isatty() if progress is None else progress
    if show:
        pieces = client.persist(pieces)
        bar = Progress(len(files))
        bar.advance(len(plan.skipped))
        try:
            summaries = client.map(_summary, futures_of(pieces), pure=False)
            for future in as_completed(summaries):
                rows, n_files = future.result()  # two numbers, not the partial tally
                bar.rows(rows)
                bar.advance(n_files)
        finally:
            bar.close()
    return _reduce_and_finish(client, pieces, _finish_piece, plan=plan, classes=classes,
                              batch_rows=batch_rows)


def _reduce_and_finish(client, pieces, finish, **options) -> StreamResult:
    """Merge a bag of pieces with Dask's tree reduction, finish on a worker, fetch the result."""
    from dask import delayed

    merged = pieces.reduction(_merge_all, _merge_all, split_every=FAN_IN)
    return client.compute(delayed(finish, pure=False)(merged, **options)).result()


class _Piece:
    """A partial tally and the files it covers (what travels between workers)."""

    def __init__(self, tally, used, skipped):
        self.tally, self.used, self.skipped = tally, list(used), list(skipped)

    @property
    def rows(self) -> int:
        return 0 if self.tally is None else self.tally.rows


def _groups(files, n: int) -> list[list]:
    """Split (file, format) pairs, in order, into at most ``n`` runs of about equal bytes."""
    n = max(1, min(n, len(files)))
    sizes = [max(size_of(f), 1) for f, _ in files]
    total, target = sum(sizes), sum(sizes) / n
    groups, current, filled = [], [], 0.0
    for pair, size in zip(files, sizes):
        current.append(pair)
        filled += size
        if filled >= target * (len(groups) + 1) and len(groups) < n - 1:
            groups.append(current)
            current = []
    if current:
        groups.append(current)
    assert sum(map(len, groups)) == len(files) and filled == total
    return groups


def _files_piece(files, *, plan, classes, batch_rows, skip) -> _Piece:
    acc, used, skipped = tally_files(plan, files, classes, skip, batch_rows)
    return _Piece(acc, used, skipped)


def _summary(pieces) -> tuple[int, int]:
    return (sum(p.rows for p in pieces),
            sum(len(p.used) + len(p.skipped) for p in pieces))


def _merge_all(pieces) -> _Piece:
    acc, used, skipped = None, [], []
    for p in pieces:
        used += p.used
        skipped += p.skipped
        if p.tally is not None:
            acc = p.tally if acc is None else acc.merge(p.tally)
    return _Piece(acc, used, skipped)


def _finish_piece(piece: _Piece, *, plan, classes, batch_rows) -> StreamResult:
    if piece.tally is None:
        first = piece.skipped[0]
        raise InvalidInputError(f"no readable file among {len(piece.skipped)}; first problem: "
                                f"{first[0]}: {first[1]}")
    order = {f: i for i, (f, _) in enumerate(plan.files)}
    used = sorted(piece.used, key=order.__getitem__)
    skipped = list(plan.skipped) + sorted(piece.skipped)
    return finish_tally(plan, piece.tally, used, skipped, classes, batch_rows)


def _run_frame(client, frame, truth, pred, fold, weight, classes, where, progress,
               count=None, na_values=()) -> StreamResult:
    import dask.bag as db

    names = list(frame.columns)
    for name in (truth, pred, weight, count, None if fold == "auto" else fold):
        if name is not None and name not in names:
            raise InvalidInputError(f"column {name!r} not found; the frame has {names!r}")
    fold_col = ("fold" if "fold" in names else None) if fold == "auto" else fold
    if where is not None and not where.columns and hasattr(where, "bind"):
        import pyarrow as pa

        where = where.bind(pa.Schema.from_pandas(frame._meta, preserve_index=False))
    plan = FilePlan(files=(), skipped=(), truth=truth, pred=pred, fold=fold_col,
                    weight=weight or count, text=False, where=where, source="dask dataframe",
                    single=False, count=count, na_values=tuple(na_values))
    parts = frame.to_delayed()
    pieces = db.from_delayed([_delayed_partition(p, i, plan, classes)
                              for i, p in enumerate(parts)])
    return _reduce_and_finish(client, pieces, _finish_frame, plan=plan, classes=classes,
                              n=len(parts))


def _delayed_partition(part, i, plan, classes):
    from dask import delayed

    return delayed(_partition_pieces, pure=False)(part, i, plan, classes)


def _partition_pieces(df, i: int, plan, classes) -> list:
    """A one-piece list: what ``dask.bag.from_delayed`` takes as a partition."""
    return [_partition_piece(df, i, plan, classes)]


def _partition_piece(df, i: int, plan, classes) -> _Piece:
    import pyarrow as pa

    table = pa.Table.from_pandas(df[plan.columns()], preserve_index=False)
    if plan.where is not None:
        table = table.filter(plan.where.expression(table.schema))
    acc = plan.new_tally()
    check = BatchCheck()
    name = Path(f"partition {i}")
    try:
        offset = 0
        for batch in table.to_batches():
            if plan.count:
                offset += batch.num_rows
                batch = whole_counts(batch, plan.count, offset - batch.num_rows)
            acc.add(batch, check)
    except InvalidInputError as exc:
        raise InvalidInputError(f"{name}: {exc}") from None
    raise_checks(name, check, acc, classes)
    return _Piece(acc, [], [])


def _finish_frame(piece: _Piece, *, plan, classes, n) -> StreamResult:
    acc = piece.tally

    def unknown(role, bad_codes, labels):
        lab = acc.labels()[role]
        shown = dict(zip(map(int, lab[0]), lab[2]))
        value = shown.get(int(bad_codes[0]), float("nan")) if len(bad_codes) else float("nan")
        column = plan.truth if role == "truth" else plan.pred
        raise InvalidInputError(f"column {column!r}: label {value!r} is not among the classes "
                                f"{list(labels)!r}")

    attrs = {"truth_column": plan.truth, "pred_column": plan.pred}
    if plan.fold:
        attrs["by_columns"] = f"fold={plan.fold}"
    if plan.weight and not plan.count:
        attrs["weight_column"] = plan.weight
    attrs.update({"n_rows": int(acc.rows), "foldcorr_version": __version__,
                  "source": plan.source, "n_partitions": n})
    if plan.fold:
        attrs["fold_column"] = plan.fold
    if plan.where is not None:
        attrs["where"] = plan.where.text
    if acc.rows == 0:
        raise InvalidInputError("the dask dataframe has no rows"
                                + (" that pass the filter" if plan.where is not None else ""))
    tensor = acc.tensor(classes=classes, attrs=attrs, unknown=unknown)
    if plan.count:
        tensor = as_counts(tensor, plan.count)
    return StreamResult(tensor=tensor, files=(), skipped=(), rows=int(acc.rows))


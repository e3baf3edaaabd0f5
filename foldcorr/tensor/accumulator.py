"""The batch accumulator: a confusion tensor counted from record batches in bounded memory.

A :class:`StreamTally` codes each batch's truth, predictions and folds (see
:mod:`foldcorr.tensor.coding`) and counts them into a dense array that grows as
new labels appear, or, once folds x K^2 passes
:data:`foldcorr.tensor.DENSE_CELL_LIMIT`, into distinct cell codes
(:mod:`foldcorr.tensor.cellcodes`) that end as a ``sparse.COO`` tensor;
partial tallies over other codes merge; the labels are
settled, sorted and put on the tensor once at the end. Batches arrive as Arrow
record batches; nothing here reads a file.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from foldcorr.errors import InvalidInputError
from foldcorr.tensor import backing
from foldcorr.tensor.cellcodes import CellCodes
from foldcorr.tensor import (
    ACTUAL,
    FOLD,
    PREDICTED,
    check_dense_size,
    confusion_tensor,
    count_codes,
    fixed_classes,
    py_value,
    sorted_codes,
)
from foldcorr.tensor.coding import (
    LabelCoder,
    coerce_classes,
    compared_labels,
    label_key,
    settle_labels,
)

__all__ = ["StreamTally", "BatchCheck", "PENDING_MAX", "take_run", "arrow_weights"]

#: Rows a uint32 count array takes in before it is added to the int64 counts.
PENDING_MAX = np.iinfo(np.uint32).max


@dataclass
class BatchCheck:
    """What :meth:`StreamTally.add` found in the batches of one file (rows count within it).

    Attributes
    ----------
    first_null : dict
        Column role (``"truth"``, ``"pred"``, ``"fold"``) -> first row with a missing value.
    nulls : dict
        Column role -> number of missing values.
    bad_weight : tuple or None
        (row, value) of the first negative or non-finite weight.
    rows : int
        Rows seen.

    Examples
    --------
    >>> import pyarrow as pa
    >>> check = BatchCheck()
    >>> StreamTally().add(pa.record_batch({"actual": ["a", None], "predicted": ["a", "a"]}), check)
    >>> check.first_null, check.rows
    ({'truth': 1}, 2)
    """

    first_null: dict = field(default_factory=dict)
    nulls: dict = field(default_factory=dict)
    bad_weight: tuple | None = None
    rows: int = 0


class StreamTally:
    """Accumulate a confusion tensor from record batches, in bounded memory.

    Counts live in a dense array indexed by the codes of truth, predictions
    and folds (each column coded on its own); it grows as new labels appear.
    Above ``DENSE_CELL_LIMIT`` cells, the distinct cells are counted instead
    and the tensor is sparse.
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
    na_values : sequence of str, default ()
        Texts that count as missing labels.

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
                 weight: str | None = None, *, text: bool = False, na_values=()):
        self.truth, self.pred, self.fold, self.weight = truth, pred, fold, weight
        na = frozenset(na_values)
        self.coders = {"truth": LabelCoder(text=text, na=na), "pred": LabelCoder(text=text, na=na)}
        if fold is not None:
            self.coders["fold"] = LabelCoder(text=text, folds=True, na=na)
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
        # Above DENSE_CELL_LIMIT cells the counts are distinct cell codes instead.
        self.cells: CellCodes | None = None

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
        if weighted or rows > PENDING_MAX:
            self._flush()
            self._counted = True
            return self._counts
        if self._pending is not None and self._pending_rows + rows > PENDING_MAX:
            self._flush()
        if self._pending is None:
            self._pending = np.zeros(self._counts.shape, dtype=np.uint32)
        self._pending_rows += rows
        return self._pending

    # -- counting
    def add(self, batch, check: BatchCheck | None = None) -> None:
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
            w = arrow_weights(batch.column(self.weight))
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
        if self.cells is not None:
            order = order if "fold" in codes else [np.zeros_like(order[0]), *order]
            self.cells.add(order, w)
            return
        target = self._target(len(codes["truth"]), w is not None)
        if "fold" not in codes:
            target = target[0]
        count_codes(order, target.shape, weights=w, out=target)

    def _grow(self) -> None:
        f = len(self.coders["fold"]) if "fold" in self.coders else 1
        kt, kp = len(self.coders["truth"]), len(self.coders["pred"])
        old = self._counts.shape
        if self.cells is None and f * kt * kp > backing.DENSE_CELL_LIMIT:
            self._to_cells()
        if self.cells is None and (f, kt, kp) != old:
            shape = (max(f, old[0]), max(kt, old[1]), max(kp, old[2]))
            # the counts, the batch counts pending and the tensor made at the end
            check_dense_size(shape, self._counts.dtype, "the streamed counts", copies=2)
            new = np.zeros(shape, self._counts.dtype)
            new[: old[0], : old[1], : old[2]] = self.counts
            self.counts = new
        if self.seen is not None:
            for role, coder in self.coders.items():
                if len(self.seen[role]) < len(coder):
                    self.seen[role] = np.concatenate(
                        [self.seen[role], np.zeros(len(coder) - len(self.seen[role]), bool)])

    def _to_cells(self) -> None:
        """Move the dense counts into distinct cell codes (the sparse way of counting)."""
        cells = CellCodes(weighted=self.weight is not None)
        f, t, p, counts = self.cell_triples()
        cells.add([f, t, p], counts)
        self.cells = cells
        self._counts = np.zeros((1, 0, 0), self._counts.dtype)
        self._pending, self._pending_rows, self._counted = None, 0, False

    def cell_triples(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Fold, truth and prediction codes of every nonzero cell, and its count."""
        if self.cells is not None:
            return self.cells.triples()
        c = self._source()
        f, t, p = np.nonzero(c)
        return f, t, p, c[f, t, p].astype(self._counts.dtype)

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
        if self.cells is not None or other.cells is not None:
            self._merge_cells(other, maps)
        else:
            self._merge_dense(other, maps)
        if self.seen is not None:
            for role, m in maps.items():
                self.seen[role][m[: len(other.seen[role])][other.seen[role]]] = True
        self.rows += other.rows
        for role in self.nulls:
            self.nulls[role] += other.nulls[role]
        return self

    def _merge_cells(self, other: StreamTally, maps: dict) -> None:
        if self.cells is None:
            self._to_cells()
        f, t, p, counts = other.cell_triples()
        f = maps["fold"][f] if "fold" in maps else f
        self.cells.add([f, maps["truth"][t], maps["pred"][p]], counts)

    def _merge_dense(self, other: StreamTally, maps: dict) -> None:
        c = other.counts
        f_map = maps.get("fold", np.zeros(1, np.int64))
        parts = [m[:n] for m, n in zip((f_map, maps["truth"], maps["pred"]), c.shape)]
        if all(np.array_equal(m, np.arange(len(m))) for m in parts):
            self.counts[: c.shape[0], : c.shape[1], : c.shape[2]] += c   # same codes
        else:
            self.counts[np.ix_(*parts)] += c
        self._counted = True

    # -- result
    def _seen_codes(self, role: str) -> np.ndarray:
        if self.seen is not None:
            return np.flatnonzero(self.seen[role])
        if self.cells is not None:
            triple = self.cells.triples()[{"fold": 0, "truth": 1, "pred": 2}[role]]
            return np.unique(triple)
        c = self._source()
        axis = {"fold": (1, 2), "truth": (0, 2), "pred": (0, 1)}[role]
        return np.flatnonzero(c.sum(axis=axis) > 0) if c.size else np.zeros(0, np.int64)

    def labels(self) -> dict:
        """Per column role: (seen codes, kind, typed values), after the text rule."""
        out = {role: (codes, *settle_labels(self.coders[role], codes))
               for role in self.coders for codes in [self._seen_codes(role)]}
        (ct, kt, vt), (cp, kp, vp) = out["truth"], out["pred"]
        kind, vt, vp = compared_labels((self.truth, self.pred), (kt, kp), (vt, vp))
        out["truth"], out["pred"] = (ct, kind or kt, vt), (cp, kind or kp, vp)
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
            labels = fixed_classes(coerce_classes(classes, kt))
            position = {label_key(v): i for i, v in enumerate(labels)}
            for role, codes, values in (("truth", ct, vt), ("pred", cp, vp)):
                bad = [c for c, v in zip(codes, values) if label_key(v) not in position]
                if bad or self.nulls[role]:
                    if unknown is not None:
                        unknown(role, np.array(bad), labels)
                    name = self.truth if role == "truth" else self.pred
                    raise InvalidInputError(
                        f"column {name!r}: labels outside the classes {labels!r}")
            map_t = np.array([position[label_key(v)] for v in vt], dtype=np.int64)
            map_p = np.array([position[label_key(v)] for v in vp], dtype=np.int64)
        else:
            union, where = [], {}
            for v in [*vt, *vp]:
                k = label_key(v)
                if k not in where:
                    where[k] = len(union)
                    union.append(v)
            codes = np.arange(len(union))
            rank, ordered = sorted_codes(codes, np.asarray(union + [None], dtype=object)[:-1])
            labels = [py_value(v) for v in ordered]
            map_t = np.array([rank[where[label_key(v)]] for v in vt], dtype=np.int64)
            map_p = np.array([rank[where[label_key(v)]] for v in vp], dtype=np.int64)
        k = len(labels)
        if self.cells is not None:
            return self._sparse_tensor(lab, (ct, map_t), (cp, map_p), labels, attrs)
        leading = {}
        if "fold" in lab:
            cf, _, vf = lab["fold"]
            rank_f, fold_values = sorted_codes(np.arange(len(vf)),
                                                np.asarray(vf + [None], dtype=object)[:-1])
            # rank_f[i] is where fold code cf[i] goes; gather by its inverse.
            folds = take_run(self._source(), np.argsort(rank_f, kind="stable"), 0, cf)
            leading[FOLD] = [py_value(v) for v in fold_values]
        else:
            folds = self._source()[:1]
        src = take_run(take_run(folds, ct, 1), cp, 2)
        if _injective(map_t, k) and _injective(map_p, k):
            if len(map_t) == k and len(map_p) == k:  # a permutation: gather by its inverse
                out = take_run(take_run(src, np.argsort(map_t), 1), np.argsort(map_p), 2)
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

    def _sparse_tensor(self, lab, truth, pred, labels, attrs):
        """The tensor backed by ``sparse.COO``: each cell's codes mapped to its place."""
        import sparse

        k, shape, leading = len(labels), [], {}
        f, t, p, counts = self.cells.triples()
        places = [_code_map(*truth, len(self.coders["truth"]))[t],
                  _code_map(*pred, len(self.coders["pred"]))[p]]
        if "fold" in lab:
            cf, _, vf = lab["fold"]
            rank_f, fold_values = sorted_codes(np.arange(len(vf)),
                                                np.asarray(vf + [None], dtype=object)[:-1])
            places.insert(0, _code_map(cf, rank_f, len(self.coders["fold"]))[f])
            leading[FOLD] = [py_value(v) for v in fold_values]
            shape.append(len(fold_values))
        data = sparse.COO(np.stack(places), counts, shape=(*shape, k, k), has_duplicates=True)
        return confusion_tensor(data, labels, leading=leading, attrs=dict(attrs or {}))


def _code_map(codes, places, size: int) -> np.ndarray:
    """An array taking each code of ``codes`` to its place in ``places`` (others to 0)."""
    out = np.zeros(size, np.int64)
    out[np.asarray(codes, np.int64)] = places
    return out


def take_run(a: np.ndarray, order, axis: int, codes=None) -> np.ndarray:
    """``a`` indexed along ``axis`` by ``codes[order]`` (``codes`` defaults to 0, 1, ...).

    A run of consecutive indices is a slice (a view, no copy); others use
    ``numpy.take``.

    Examples
    --------
    >>> a = np.arange(6).reshape(2, 3)
    >>> take_run(a, [1, 2], 1).tolist(), np.shares_memory(take_run(a, [1, 2], 1), a)
    ([[1, 2], [4, 5]], True)
    >>> take_run(a, [1, 0], 1, codes=[2, 0]).tolist()
    [[0, 2], [3, 5]]
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


def arrow_weights(arr) -> np.ndarray:
    """Sample weights of an Arrow column as float64 (missing ones NaN).

    Raises
    ------
    InvalidInputError
        When the column does not hold numbers.

    Examples
    --------
    >>> import pyarrow as pa
    >>> arrow_weights(pa.array([1, None, 2])).tolist()
    [1.0, nan, 2.0]
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks()
    if not (pa.types.is_integer(arr.type) or pa.types.is_floating(arr.type)
            or pa.types.is_null(arr.type)):
        raise InvalidInputError("weights must be numbers")
    arr = pc.cast(arr, pa.float64())
    return arr.to_numpy(zero_copy_only=False).astype(np.float64)

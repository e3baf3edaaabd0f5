r"""The resampling engine: multinomial draws of the nonzero cells of a tensor.

Resampling N samples with replacement makes the cell counts of a confusion
tensor Multinomial(N, C / N). So the bootstrap here draws the nonzero cells of
the tensor directly, O(B * nnz) work instead of O(B * N), with exactly the
distribution of per-sample resampling. Each slice over the leading dims (each
fold, each label, ...) is a stratum, drawn on its own and keeping its own total;
the statistic is then applied once to a whole block of resampled tensors, since
every metric broadcasts over leading dims. A block of resamples is a sparse
tensor of the drawn cells when most cells are empty, so the statistic rebuilds
margins and trace with one bincount per block: O(B * (nnz + F * K)) time and
memory bounded by the block size. Percentile and BCa intervals are read off
the draws in :mod:`foldcorr.analysis.intervals`.

Weighted tensors are refused, whatever their values: the cells no longer say
how many samples they hold (see :func:`whole_counts`).

Every bootstrap, paired comparison and interval of foldcorr runs through the
public names here. Nothing here reads files or prints; randomness comes from one
keyword-only ``seed``, normalised once with :func:`numpy.random.default_rng`.
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from functools import cached_property, partial

import numpy as np
import xarray as xr

from foldcorr.errors import (
    MAX_RESAMPLES,
    MIN_RESAMPLES,
    InvalidTensorError,
    OptionError,
    UndefinedMetricWarning,
)
from foldcorr.tensor import ACTUAL, FOLD, PREDICTED, is_sparse, pool, py_value, validate_tensor

__all__ = [
    "RESAMPLE", "METHODS", "check_level", "check_resamples",
    "whole_counts", "Strata", "resample_cells", "resample_blocks", "statistic_label", "apply_statistic",
    "pool_folds", "statistic_draws", "where_label",
]

#: Name of the leading dim that indexes bootstrap resamples.
RESAMPLE = "resample"
#: Interval methods accepted by :func:`bootstrap`.
METHODS = ("percentile", "bca")

# Cells per block of resampled tensors handed to the statistic at once.
_BLOCK_CELLS = 1 << 22


def check_level(level, *, name: str = "level") -> float:
    """Return ``level`` as a float, or raise unless it lies strictly in (0, 1).

    Examples
    --------
    >>> check_level(0.95)
    0.95
    >>> check_level(95)
    Traceback (most recent call last):
    ...
    foldcorr.errors.OptionError: `level` must be a number strictly between 0 and 1 (e.g. 0.95); got 95
    """
    ok = isinstance(level, numbers.Real) and not isinstance(level, bool)
    if not ok or not (0.0 < float(level) < 1.0):
        raise OptionError(
            f"`{name}` must be a number strictly between 0 and 1 (e.g. 0.95); got {level!r}"
        )
    return float(level)


def check_resamples(n_resamples, *, name: str = "n_resamples", minimum: int = MIN_RESAMPLES) -> int:
    """Return ``n_resamples`` as an int, or raise unless a whole number in [minimum, 10^6].

    Examples
    --------
    >>> check_resamples(2000)
    2000
    >>> check_resamples(10**7)
    Traceback (most recent call last):
    ...
    foldcorr.errors.OptionError: `n_resamples` must be a whole number of at most 1,000,000; got 10000000
    """
    ok = isinstance(n_resamples, numbers.Integral) and not isinstance(n_resamples, bool)
    if not ok or not minimum <= int(n_resamples) <= MAX_RESAMPLES:
        bound = (f"at most {MAX_RESAMPLES:,}" if ok and n_resamples > MAX_RESAMPLES
                 else f"at least {minimum}")
        raise OptionError(f"`{name}` must be a whole number of {bound}; got {n_resamples!r}")
    return int(n_resamples)


def where_label(t: xr.DataArray, index) -> str:
    """``dim=value`` of each dim of ``t`` at ``index``, for messages.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> where_label(tally([0, 1], [0, 1], folds=[1, 2]), (1,))
    'fold=2'
    """
    parts = []
    for dim, i in zip(t.dims, index):
        value = t.coords[dim].values[i] if dim in t.coords else i
        value = value.item() if isinstance(value, np.generic) else value
        parts.append(f"{dim}={value!r}")
    return ", ".join(parts)


def whole_counts(t, *, what: str = "the bootstrap") -> xr.DataArray:
    """Validate a tensor and return it, refusing any tensor tallied with weights.

    The rule, the one used by every resampling in foldcorr: a tensor holds
    counts of samples only when its counts have an integer dtype (int64 after
    :func:`foldcorr.tensor.validate_tensor`) and it records no
    ``weight_column``. A weighted tally has float64 counts and records its
    weight column (:func:`foldcorr.tensor.tally`, ``tally_frame``,
    ``foldcorr.sources.stream``); it is refused even when every weight happens to
    be a whole number, since a cell of weight 10 is not 10 samples.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor (any class dims; see :func:`resample_cells`).
    what : str
        Named in the error message.

    Returns
    -------
    xarray.DataArray
        The tensor, with int64 counts.

    Raises
    ------
    InvalidTensorError
        When the counts are floating point or the tensor records a
        ``weight_column`` (a weighted tensor), or a slice over the leading
        dims holds no samples.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> whole_counts(confusion_tensor([[2, 1], [0, 3]], [0, 1])).dtype
    dtype('int64')
    >>> whole_counts(confusion_tensor([[2.0, 1.0], [0.0, 3.0]], [0, 1]))
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidTensorError: the bootstrap resamples samples, so it needs whole counts; ...
    """
    if ACTUAL in getattr(t, "dims", ()) and PREDICTED in t.dims:
        t = validate_tensor(t)
    elif not isinstance(t, xr.DataArray):
        raise InvalidTensorError(
            f"a confusion tensor must be an xarray.DataArray; got {type(t).__name__!r}"
        )
    reason = _weighted_reason(t)
    if reason is not None:
        raise InvalidTensorError(
            f"{what} resamples samples, so it needs whole counts; this tensor holds "
            f"weighted sums ({reason}). Score without sample weights to get intervals"
        )
    if t.dtype != np.int64:
        t = t.copy(data=t.data.astype(np.int64))
    return t


def _weighted_reason(t: xr.DataArray) -> str | None:
    """Why ``t`` counts as a weighted tensor, or None when it holds sample counts."""
    column = t.attrs.get("weight_column")
    if column:
        return f"it was tallied with the weight column {column!r}"
    if np.issubdtype(t.dtype, np.floating):
        if is_sparse(t):
            values, coords = t.data.data, t.data.coords
        else:
            values = np.asarray(t.values).reshape(-1)
            coords = None
        frac = values != np.round(values)
        cells = np.flatnonzero(frac) if frac.any() else np.flatnonzero(values != 0)
        at = ""
        if len(cells):
            index = (tuple(coords[:, cells[0]]) if coords is not None
                     else np.unravel_index(cells[0], t.shape))
            at = f", e.g. {py_value(values[cells[0]])!r} at {where_label(t, index)}"
        return (f"{t.dtype} counts{at}, as a weighted tally has; if these are plain "
                "sample counts, give them an integer dtype with .astype('int64')")
    return None


@dataclass(frozen=True)
class Strata:
    """The nonzero cells of every slice over the leading dims, padded to one width.

    ``lead`` are the leading dims (one stratum per combination), ``cell_dims``
    the trailing class dims; ``index[s, r]`` is the flat cell of the r-th
    nonzero cell of stratum s (padding points one past the last cell) and
    ``counts[s, r]`` its count (0 for padding). :meth:`of` builds it (refusing
    a stratum with no samples), :meth:`draw` draws every stratum's cells from
    its multinomial and :meth:`dense` scatters draws back into tensors.

    Examples
    --------
    >>> import numpy as np
    >>> from foldcorr.tensor import tally
    >>> t = tally([0, 0, 1, 1], [0, 1, 1, 1], folds=[1, 1, 2, 2])
    >>> strata = Strata.of(t, ("actual", "predicted"))
    >>> strata.lead, strata.index.tolist(), strata.counts.tolist()
    (('fold',), [[0, 1], [3, 4]], [[1, 1], [2, 0]])
    >>> strata.dense(strata.draw(np.random.default_rng(0), 2)).dims
    ('resample', 'fold', 'actual', 'predicted')
    """

    tensor: xr.DataArray
    lead: tuple
    cell_dims: tuple
    index: np.ndarray
    counts: np.ndarray

    @classmethod
    def of(cls, t: xr.DataArray, cell_dims) -> Strata:
        lead = tuple(d for d in t.dims if d not in cell_dims)
        t = t.transpose(*lead, *cell_dims)
        lead_shape = tuple(t.sizes[d] for d in lead)
        n_cells = int(np.prod([t.sizes[d] for d in cell_dims]))
        stratum, cell, count = _stratum_cells(t, len(lead), n_cells)
        strata = int(np.prod(lead_shape, dtype=np.int64))
        totals = np.bincount(stratum, weights=count, minlength=strata)
        if (totals == 0).any():
            s = int(np.flatnonzero(totals == 0)[0])
            index = np.unravel_index(s, lead_shape) if lead else ()
            where = where_label(t, index) if lead else "the whole tensor"
            raise InvalidTensorError(
                f"cannot resample: {where} holds no samples; drop that slice first"
            )
        per = np.bincount(stratum, minlength=strata)
        width = max(int(per.max(initial=0)), 1)
        pos = np.arange(len(stratum)) - np.repeat(np.cumsum(per) - per, per)
        index = np.full((strata, width), n_cells, dtype=np.int64)
        counts = np.zeros((strata, width), dtype=np.int64)
        index[stratum, pos] = cell
        counts[stratum, pos] = count
        return cls(t, lead, tuple(cell_dims), index, counts)

    @property
    def n_cells(self) -> int:
        return int(np.prod([self.tensor.sizes[d] for d in self.cell_dims]))

    @property
    def block_cells(self) -> int:
        """Cells one resampled tensor costs: its nonzero cells when drawn sparse."""
        return self.counts.size if self.sparse else max(self.tensor.size, self.counts.size)

    @property
    def sparse(self) -> bool:
        """Whether resamples are sparse tensors: a sparse tensor, or under a quarter of
        the cells of some stratum nonzero (so the dense cells would be mostly zeros)."""
        return is_sparse(self.tensor) or 4 * self.index.shape[1] <= self.n_cells

    def draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        """Multinomial draws of every stratum's cells, shape (size, strata, width)."""
        totals = self.counts.sum(axis=1)
        probs = self.counts / totals[:, None]
        return rng.multinomial(totals, probs, size=(size, len(totals)))

    def resample(self, rng: np.random.Generator, size: int) -> xr.DataArray:
        """``size`` resampled tensors (the protocol :func:`statistic_draws` asks for):
        dense, or sparse with the drawn cells only (see :attr:`sparse`)."""
        draws = self.draw(rng, size)
        return self.sparse_block(draws) if self.sparse else self.dense(draws)

    def dense(self, draws: np.ndarray) -> xr.DataArray:
        """Scatter draws back into full tensors with a leading ``resample`` dim."""
        size, strata, _ = draws.shape
        out = np.zeros((size, strata, self.n_cells + 1), dtype=np.int64)
        index = np.broadcast_to(self.index, draws.shape)
        np.put_along_axis(out, index, draws, axis=2)
        shape = (size, *self.tensor.shape)
        t = self.tensor
        return xr.DataArray(out[..., : self.n_cells].reshape(shape),
                            dims=(RESAMPLE, *t.dims), coords=t.coords, name=t.name)

    def sparse_block(self, draws: np.ndarray) -> xr.DataArray:
        """Draws as one ``sparse.COO`` tensor with a leading ``resample`` dim: only the
        drawn cells are stored, O(size x nonzero cells), never the K x K cells."""
        import sparse

        real, base = self._cells
        size = draws.shape[0]
        coords = _block_coords(base, size)
        t = self.tensor
        data = sparse.COO(coords, draws[:, real].reshape(-1), shape=(size, *t.shape),
                          has_duplicates=False, sorted=True)
        return xr.DataArray(data, dims=(RESAMPLE, *t.dims), coords=t.coords, name=t.name)

    def pooled(self, block: xr.DataArray) -> xr.DataArray:
        """A block of resamples summed over ``fold``: one bincount of the drawn cells into
        the distinct pooled cells for a sparse block (no sort), else :func:`pool_folds`."""
        if not is_sparse(block) or FOLD not in self.lead:
            return pool_folds(block, True)
        import sparse

        ids, cells, shape = self._pooled_cells
        size = block.sizes[RESAMPLE]
        n_out = cells.shape[1]
        at = (np.arange(size)[:, None] * n_out + ids[None]).reshape(-1)
        sums = np.bincount(at, weights=block.data.data, minlength=size * n_out)
        coords = _block_coords(cells, size)
        dims = [d for d in block.dims if d != FOLD]
        data = sparse.COO(coords, np.rint(sums).astype(np.int64), shape=(size, *shape),
                          has_duplicates=False, sorted=True)
        return xr.DataArray(data, dims=dims, name=block.name,
                            coords={n: c for n, c in block.coords.items() if FOLD not in c.dims})

    @cached_property
    def _cells(self):
        """Mask of the real (not padding) entries and their coords over the tensor's dims."""
        real = self.index < self.n_cells
        stratum = np.nonzero(real)[0]
        lead_shape = [self.tensor.sizes[d] for d in self.lead]
        cell_shape = [self.tensor.sizes[d] for d in self.cell_dims]
        lead = np.unravel_index(stratum, lead_shape) if self.lead else ()
        base = np.vstack([*lead, *np.unravel_index(self.index[real], cell_shape)])
        return real, base.astype(np.intp)

    @cached_property
    def _pooled_cells(self):
        """Per real entry, its distinct cell once ``fold`` is summed; those cells' coords."""
        _, base = self._cells
        axis = self.tensor.dims.index(FOLD)
        rest = np.delete(base, axis, axis=0)
        shape = tuple(n for d, n in self.tensor.sizes.items() if d != FOLD)
        keys = np.ravel_multi_index(tuple(rest), shape)
        cells, ids = np.unique(keys, return_inverse=True)
        return ids.reshape(-1), np.vstack(np.unravel_index(cells, shape)), shape


def _block_coords(base: np.ndarray, size: int) -> np.ndarray:
    """Coords of ``size`` copies of the cells ``base`` (dims, cells), resample index first."""
    dims, n = base.shape
    coords = np.empty((dims + 1, size, n), dtype=np.intp)
    coords[0] = np.arange(size)[:, None]
    coords[1:] = base[:, None, :]
    return coords.reshape(dims + 1, size * n)


def _stratum_cells(t: xr.DataArray, n_lead: int, n_cells: int):
    """Stratum, flat cell and count of every nonzero cell, sorted by stratum then cell."""
    data = t.data
    if is_sparse(data):
        keep = data.data != 0
        coords = data.coords[:, keep]
        lead_shape, cell_shape = data.shape[:n_lead], data.shape[n_lead:]
        stratum = (np.ravel_multi_index(tuple(coords[:n_lead]), lead_shape) if n_lead
                   else np.zeros(coords.shape[1], np.int64))
        cell = np.ravel_multi_index(tuple(coords[n_lead:]), cell_shape)
        order = np.lexsort((cell, stratum))
        return stratum[order], cell[order], data.data[keep][order].astype(np.int64)
    flat = np.asarray(data).reshape(-1, n_cells)
    stratum, cell = np.nonzero(flat)
    return stratum, cell, flat[stratum, cell].astype(np.int64)


def resample_cells(t: xr.DataArray, n_resamples: int, *,
                   seed: int | np.random.Generator | None = None) -> xr.DataArray:
    r"""Bootstrap resamples of a confusion tensor, drawn cell by cell.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor with whole counts, dims ``(..., "actual", "predicted")``.
    n_resamples : int
        Number of resamples (at least 1).
    seed : int, numpy.random.Generator or None, optional
        Seed of the generator; the same seed gives the same resamples.

    Returns
    -------
    xarray.DataArray
        Dims ``("resample", ..., "actual", "predicted")``; every slice over the
        leading dims keeps its own total.

    Raises
    ------
    InvalidTensorError
        On a weighted tensor or a slice with no samples.
    OptionError
        When ``n_resamples`` is not a positive whole number.

    Notes
    -----
    Drawing N samples with replacement from a slice with cell counts
    :math:`C_{ij}` and total N gives counts
    :math:`C^* \sim \mathrm{Multinomial}(N, C / N)`. Only nonzero cells can
    receive counts, so each resample costs O(nnz), not O(N).

    References
    ----------
    .. [1] B. Efron, R. J. Tibshirani, *An Introduction to the Bootstrap*,
       Chapman & Hall (1993), ch. 6.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> t = tally([0, 0, 1, 1, 1], [0, 1, 1, 1, 0], folds=[1, 1, 1, 2, 2])
    >>> r = resample_cells(t, 3, seed=0)
    >>> r.dims
    ('resample', 'fold', 'actual', 'predicted')
    >>> r.sum(("actual", "predicted")).values.tolist()
    [[3, 2], [3, 2], [3, 2]]
    """
    n = check_resamples(n_resamples, minimum=1)
    strata = Strata.of(whole_counts(t, what="resampling"), (ACTUAL, PREDICTED))
    return strata.dense(strata.draw(np.random.default_rng(seed), n))


def statistic_label(statistic) -> str:
    """The name a statistic goes by in messages (partials unwrapped).

    Examples
    --------
    >>> from functools import partial
    >>> from foldcorr.metrics import rk
    >>> statistic_label(partial(rk, undefined="nan")), statistic_label(len)
    ('R_K', 'len')
    """
    while isinstance(statistic, partial):
        statistic = statistic.func
    name = getattr(statistic, "__name__", None) or "the statistic"
    return {"rk": "R_K", "ovr_mcc": "one-vs-rest MCC", "drag": "drag"}.get(name, name)


def apply_statistic(statistic, x: xr.DataArray, label: str) -> xr.DataArray:
    """``statistic(x)``, refused unless it returns a DataArray.

    Raises
    ------
    OptionError
        When the statistic returns anything but an :class:`xarray.DataArray`.

    Examples
    --------
    >>> from foldcorr.metrics import rk
    >>> from foldcorr.tensor import confusion_tensor
    >>> round(float(apply_statistic(rk, confusion_tensor([[3, 1], [0, 4]], [0, 1]), "R_K")), 4)
    0.7746
    """
    out = statistic(x)
    if isinstance(out, xr.Dataset) or not isinstance(out, xr.DataArray):
        raise OptionError(
            f"the statistic must return an xarray.DataArray; {label} returned "
            f"{type(out).__name__!r}"
        )
    return out


def pool_folds(x: xr.DataArray, pooled: bool) -> xr.DataArray:
    """``x`` summed over ``fold`` when ``pooled`` and it has that dim, else ``x``.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> pool_folds(tally([0, 1, 1], [0, 1, 0], folds=[1, 1, 2]), True).dims
    ('actual', 'predicted')
    """
    return pool(x) if pooled else x


def resample_blocks(total: int, cells: int):
    """Sizes of the blocks ``total`` resamples of ``cells`` cells each are drawn in.

    A block holds at most about four million cells, so memory stays bounded
    whatever the number of resamples.

    Examples
    --------
    >>> list(resample_blocks(5, 1 << 21))
    [2, 2, 1]
    """
    step = max(1, _BLOCK_CELLS // max(cells, 1))
    for start in range(0, total, step):
        yield min(step, total - start)


def statistic_draws(strata: Strata, rng, n, jobs) -> dict:
    """The statistic of every resample, for several statistics sharing the resamples.

    ``strata`` is anything with a ``tensor``, ``block_cells``, ``resample(rng, size)``
    and ``pooled(block)``
    (:class:`Strata`, or :class:`foldcorr.analysis.clustered.ClusterStrata`). ``jobs`` maps a name to ``(statistic, pooled, label)``; each value holds
    dim ``resample`` first.

    Raises
    ------
    OptionError
        When a statistic drops the ``resample`` dim (it does not broadcast).

    Examples
    --------
    >>> import numpy as np
    >>> from foldcorr.metrics import rk
    >>> from foldcorr.tensor import confusion_tensor
    >>> strata = Strata.of(confusion_tensor([[3, 1], [0, 4]], [0, 1]), ("actual", "predicted"))
    >>> out = statistic_draws(strata, np.random.default_rng(0), 5, {"rk": (rk, True, "R_K")})
    >>> out["rk"].dims, out["rk"].sizes["resample"]
    (('resample',), 5)
    """
    out = {name: [] for name in jobs}
    for size in resample_blocks(n, strata.block_cells):
        views = {False: strata.resample(rng, size)}
        for name, (statistic, pooled, label) in jobs.items():
            if pooled not in views:  # one pooled block serves every pooled statistic
                views[pooled] = strata.pooled(views[False])
            values = apply_statistic(statistic, views[pooled], label)
            if RESAMPLE not in values.dims:
                raise OptionError(
                    f"the statistic must broadcast over leading dims; {label} dropped the "
                    f"{RESAMPLE!r} dim (returned dims {values.dims!r})"
                )
            out[name].append(values)
    return {name: xr.concat(parts, RESAMPLE) for name, parts in out.items()}



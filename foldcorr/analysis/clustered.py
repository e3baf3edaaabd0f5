r"""The resampling engine, part two: whole clusters of samples, from sparse cells.

Samples of one cluster (one specimen, one site, one patient) share their fate,
so resampling them one by one treats correlated samples as independent and
gives intervals too narrow by about the square root of the design effect.
:class:`ClusterStrata` resamples clusters whole: within each fold when every
cluster lies in one fold, over the whole data otherwise. The input is a
:class:`foldcorr.tensor.ClusterCells`, one row per (cluster, fold, cell) that
holds samples, never a dense clusters x K x K array; a block of resamples is
one multinomial draw of cluster multiplicities per stratum and one
``numpy.bincount`` of ``multiplicity * count`` into the cells (:func:`scatter`).

Without clusters the same object draws the cells themselves (Multinomial(N_f,
C_f / N_f) per fold, the draw of :class:`foldcorr.analysis.resampling.Strata`,
in the same order, so the same seed gives the same resamples) from sparse
cells: the paired comparisons of many models use it, at most N cells per pair.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import xarray as xr

from foldcorr.analysis.resampling import RESAMPLE, Strata, pool_folds, statistic_draws
from foldcorr.errors import InvalidTensorError, OptionError
from foldcorr.tensor import ACTUAL, FOLD, PREDICTED, ClusterCells, is_sparse

__all__ = ["ClusterStrata", "scatter", "scatter_sparse", "sparse_cells", "design_effect", "same_samples", "CLUSTER_RK",
           "cluster_strata", "check_cells", "dense_cells", "cluster_notes"]


def scatter(draws: np.ndarray, index: np.ndarray, n_out: int) -> np.ndarray:
    """Counts ``draws`` (size, rows) added into ``n_out`` cells at ``index`` (rows): (size, n_out).

    Examples
    --------
    >>> scatter(np.array([[1, 2, 3]]), np.array([0, 1, 0]), 2).tolist()
    [[4, 2]]
    """
    size = draws.shape[0]
    at = (np.arange(size)[:, None] * n_out + index[None, :]).ravel()
    flat = np.bincount(at, weights=draws.ravel(), minlength=size * n_out)
    return np.rint(flat).astype(np.int64).reshape(size, n_out)


def sparse_cells(index: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The distinct cells of a 1-D ``index`` and each entry's place among them.

    Found once and given to :func:`scatter_sparse` as ``cells=``, they spare
    a sort of every block of resamples that shares the index.

    Examples
    --------
    >>> [a.tolist() for a in sparse_cells(np.array([5, 2, 5]))]
    [[2, 5], [1, 0, 1]]
    """
    cells, inverse = np.unique(index, return_inverse=True)
    return cells, inverse.reshape(-1)


def scatter_sparse(draws: np.ndarray, index: np.ndarray, shape, *,
                   cells: tuple[np.ndarray, np.ndarray] | None = None) -> object:
    """:func:`scatter` into a ``sparse.COO`` of shape (size, *shape): only the cells drawn
    into are stored, O(size x rows log) work, never size x prod(shape) cells.

    Examples
    --------
    >>> scatter_sparse(np.array([[1, 2, 3]]), np.array([0, 1, 0]), (2,)).todense().tolist()
    [[4, 2]]
    """
    import sparse

    if cells is not None:
        return _scatter_known_cells(draws, cells, shape)
    size = draws.shape[0]
    n_out = int(np.prod(shape, dtype=np.int64))
    at = (np.arange(size, dtype=np.int64)[:, None] * n_out + index[None, :]).ravel()
    keep = draws.ravel() != 0
    cells, inverse = np.unique(at[keep], return_inverse=True)
    counts = np.bincount(inverse.reshape(-1), weights=draws.ravel()[keep], minlength=len(cells))
    full = (size, *shape)
    return sparse.COO(np.stack(np.unravel_index(cells, full)), np.rint(counts).astype(np.int64),
                      shape=full, has_duplicates=False, sorted=True)


def _scatter_known_cells(draws: np.ndarray, cells, shape) -> object:
    """:func:`scatter_sparse` of an index whose cells are known: one bincount, no sort."""
    import sparse

    size, (found, inverse) = draws.shape[0], cells
    at = (np.arange(size, dtype=np.int64)[:, None] * len(found) + inverse[None, :]).ravel()
    counts = np.rint(np.bincount(at, weights=draws.ravel(), minlength=size * len(found)))
    keep = np.flatnonzero(counts)
    resample, cell = np.divmod(keep, max(len(found), 1))
    coords = np.stack([resample, *np.unravel_index(found[cell], tuple(shape))])
    return sparse.COO(coords, counts[keep].astype(np.int64), shape=(size, *shape),
                      has_duplicates=False, sorted=True)


@dataclass(frozen=True)
class ClusterStrata:
    """Resamples of sparse cells: whole clusters, or (``clustered=False``) single samples.

    Attributes
    ----------
    cells : ClusterCells
        The input.
    clustered : bool
        Whether clusters are the resampling units.
    fold, cell, counts : numpy.ndarray
        One entry per row drawn (per (cluster, fold, cell) when clustered,
        per (fold, cell) otherwise).
    unit : numpy.ndarray
        Cluster code of each row (clustered only).
    strata : list of numpy.ndarray
        The cluster codes of each stratum (clustered), drawn on their own.
    across_folds : bool
        True when some cluster spans folds, so clusters are drawn over the
        whole data and fold sizes vary between resamples.

    Examples
    --------
    >>> from foldcorr.tensor import cluster_tally
    >>> c = cluster_tally([0, 0, 1, 1], [0, 1, 1, 1], cluster=[1, 1, 2, 2])
    >>> s = ClusterStrata.of(c)
    >>> block = s.resample(np.random.default_rng(0), 3)
    >>> block.dims, block.sum(("actual", "predicted")).values.tolist()
    (('resample', 'actual', 'predicted'), [4, 4, 4])
    """

    cells: ClusterCells
    clustered: bool
    fold: np.ndarray
    cell: np.ndarray
    counts: np.ndarray
    unit: np.ndarray
    strata: list
    across_folds: bool

    @classmethod
    def of(cls, cells: ClusterCells, *, clustered: bool = True) -> ClusterStrata:
        if not clustered:
            size = cells.k ** len(cells.dims)
            key, inverse = np.unique(cells.fold * size + cells.cell, return_inverse=True)
            counts = np.bincount(inverse, weights=cells.count, minlength=len(key))
            return cls(cells, False, key // size, key % size, np.rint(counts).astype(np.int64),
                       np.zeros(0, np.int64), [], False)
        pairs = np.unique(cells.cluster * cells.n_folds + cells.fold)
        spans = len(np.unique(pairs // cells.n_folds)) < len(pairs)
        home = np.zeros(cells.n_clusters, np.int64)
        if not spans:
            home[pairs // cells.n_folds] = pairs % cells.n_folds
        strata = [np.flatnonzero(home == f) for f in np.unique(home)]
        return cls(cells, True, cells.fold, cells.cell, cells.count, cells.cluster, strata,
                   bool(spans and cells.folds is not None))

    @cached_property
    def tensor(self) -> xr.DataArray:
        """The dense tensor of every cluster together."""
        return self.cells.tensor()

    @property
    def n_units(self) -> int:
        """Clusters (clustered) or samples (not clustered) drawn in all."""
        return self.cells.n_clusters if self.clustered else int(self.counts.sum())

    def draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        """Counts of every row in ``size`` resamples, shape (size, rows)."""
        if self.clustered:
            times = np.zeros((size, self.cells.n_clusters), np.int64)
            for units in self.strata:
                g = len(units)
                times[:, units] = rng.multinomial(g, np.full(g, 1.0 / g), size=size)
            return times[:, self.unit] * self.counts[None, :]
        folds = np.unique(self.fold)
        starts = np.searchsorted(self.fold, folds)
        pos = np.arange(len(self.fold)) - starts[np.searchsorted(folds, self.fold)]
        width = int(pos.max()) + 1
        counts = np.zeros((len(folds), width), np.int64)
        row = np.searchsorted(folds, self.fold)
        counts[row, pos] = self.counts
        totals = counts.sum(axis=1)
        out = rng.multinomial(totals, counts / totals[:, None], size=(size, len(folds)))
        return out[:, row, pos]

    @property
    def block_cells(self) -> int:
        """Cells one resampled tensor costs (see :func:`statistic_draws`)."""
        return max(self.tensor.size, self.counts.size)

    def pooled(self, block: xr.DataArray) -> xr.DataArray:
        """A block of resamples summed over ``fold`` (see :func:`statistic_draws`)."""
        return pool_folds(block, True)

    def resample(self, rng: np.random.Generator, size: int) -> xr.DataArray:
        """``size`` resampled dense tensors, dims ``("resample", [fold,] *dims)``."""
        t = self.tensor
        n_cells = self.cells.k ** len(self.cells.dims)
        flat = scatter(self.draw(rng, size), self.fold * n_cells + self.cell, t.size)
        return xr.DataArray(flat.reshape(size, *t.shape), dims=(RESAMPLE, *t.dims),
                            coords=t.coords, name=t.name)


def same_samples(t: xr.DataArray, cells: ClusterCells, *, name: str = "cluster") -> None:
    """Refuse ``cells`` unless they count exactly the samples of the dense tensor ``t``.

    Raises
    ------
    InvalidTensorError
        When dims, classes, folds or any count differ.

    Examples
    --------
    >>> from foldcorr.tensor import cluster_tally, tally
    >>> c = cluster_tally([0, 1, 1], [0, 1, 0], cluster=[5, 5, 6])
    >>> same_samples(tally([0, 1, 1], [0, 1, 0]), c)
    >>> same_samples(tally([0, 1, 1], [0, 1, 1]), c)
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidTensorError: `cluster` must count the same samples as the tensor ...
    """
    dense = cells.tensor()
    ok = tuple(dense.dims) == tuple(t.dims) and all(
        np.array_equal(dense.coords[d].values, t.coords[d].values) for d in dense.dims)
    if not ok or not np.array_equal(dense.values, t.values):
        raise InvalidTensorError(
            f"`{name}` must count the same samples as the tensor (the same dims, classes, "
            f"folds and counts); its tensor has dims {dense.dims!r} and {int(dense.sum())} "
            f"samples, the tensor {t.dims!r} and {int(t.sum())}. Build both from the same "
            "labels: cluster_tally(truth, pred, cluster=..., folds=...)")


def design_effect(t: xr.DataArray, cluster_draws: xr.DataArray, statistic, rng, n: int,
                  *, pooled: bool = True) -> float:
    """Variance of the cluster bootstrap draws over that of the iid bootstrap of ``t``.

    ``cluster_draws`` are the draws of a scalar statistic under the cluster
    bootstrap; the iid bootstrap of the same statistic (``n`` resamples,
    stratified by fold) is drawn here. NaN when the iid variance is 0.

    Examples
    --------
    >>> from foldcorr.metrics import rk
    >>> from foldcorr.tensor import cluster_tally
    >>> c = cluster_tally([0, 1] * 50, [0, 1] * 45 + [1, 0] * 5, cluster=range(100))
    >>> s = ClusterStrata.of(c)
    >>> rng = np.random.default_rng(0)
    >>> d = statistic_draws(s, rng, 400, {"rk": (rk, True, "R_K")})["rk"]
    >>> 0.7 < design_effect(c.tensor(), d, rk, rng, 400) < 1.4
    True
    """
    iid = statistic_draws(Strata.of(t, tuple(d for d in t.dims if d != FOLD)), rng, n,
                          {"x": (statistic, pooled, "iid")})["x"]
    var_iid = float(np.nanvar(iid.values))
    var_cluster = float(np.nanvar(cluster_draws.values))
    return var_cluster / var_iid if var_iid > 0 else float("nan")


#: Name of the internal job that draws pooled R_K for the design effect.
CLUSTER_RK = "cluster_rk"


def cluster_strata(t: xr.DataArray, cluster, method: str) -> ClusterStrata:
    """Check ``cluster`` against the tensor ``t`` and return its cluster strata.

    Raises
    ------
    InvalidTensorError
        When ``cluster`` is not a :class:`foldcorr.tensor.ClusterCells` of the
        samples of ``t``.
    OptionError
        With ``method="bca"``: the cell jackknife of BCa deletes one sample, and
        with clusters the unit to delete is a cluster; only percentile
        intervals are given.

    Examples
    --------
    >>> from foldcorr.tensor import cluster_tally, tally
    >>> c = cluster_tally([0, 1, 1], [0, 1, 0], cluster=[5, 5, 6])
    >>> cluster_strata(tally([0, 1, 1], [0, 1, 0]), c, "percentile").n_units
    2
    """
    check_cells(cluster, (ACTUAL, PREDICTED))
    if method != "percentile":
        raise OptionError(
            f"with `cluster`, only method='percentile' is offered (BCa's jackknife would have "
            f"to delete whole clusters); got method={method!r}")
    same_samples(t, cluster)
    return ClusterStrata.of(cluster)


def check_cells(cluster, dims) -> ClusterCells:
    """Refuse anything but a :class:`foldcorr.tensor.ClusterCells` over the class dims ``dims``.

    Examples
    --------
    >>> check_cells([1, 2], ("actual", "predicted"))
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidTensorError: `cluster` must be the samples' cells by cluster, ...
    """
    if not isinstance(cluster, ClusterCells):
        raise InvalidTensorError(
            "`cluster` must be the samples' cells by cluster, from cluster_tally(truth, "
            f"*predictions, cluster=ids, folds=...); got {type(cluster).__name__!r}")
    if tuple(cluster.dims) != tuple(dims):
        raise InvalidTensorError(
            f"`cluster` must have class dims {tuple(dims)!r} (one prediction array per "
            f"model); got {cluster.dims!r}")
    return cluster


def dense_cells(t: xr.DataArray) -> ClusterCells:
    """The nonzero cells of a tensor (dims ``([fold,] *class dims)``, either backing), one cluster.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> c = dense_cells(tally([0, 1, 1], [0, 1, 0]))
    >>> c.cell.tolist(), c.count.tolist(), c.n_clusters
    ([0, 2, 3], [1, 1, 1], 1)
    """
    dims = tuple(d for d in t.dims if d != FOLD)
    lead = [FOLD] if FOLD in t.dims else []
    size = t.sizes[dims[0]] ** len(dims)
    data = t.transpose(*lead, *dims).data
    if is_sparse(data):  # the stored cells, in C order
        keep = data.data != 0
        flat = np.ravel_multi_index(tuple(data.coords[:, keep]), data.shape)
        order = np.argsort(flat, kind="stable")
        flat, values = flat[order], data.data[keep][order]
    else:
        values = np.asarray(data).reshape(-1)
        flat = np.flatnonzero(values)
        values = values[flat]
    return ClusterCells(
        dims=dims, classes=t.coords[dims[0]].values.tolist(),
        folds=t.coords[FOLD].values.tolist() if lead else None,
        clusters=np.array([0], dtype=object), cluster=np.zeros(len(flat), np.int64),
        fold=flat // size, cell=flat % size, count=values.astype(np.int64))


def cluster_notes(strata: ClusterStrata) -> tuple[str, ...]:
    """A note when clusters span folds (they are then resampled over the whole data).

    Examples
    --------
    >>> from foldcorr.tensor import cluster_tally
    >>> c = cluster_tally([0, 1, 1, 0], [0, 1, 0, 0], cluster=[1, 1, 2, 2], folds=[0, 1, 0, 1])
    >>> cluster_notes(ClusterStrata.of(c))[0][:40]
    'clusters span folds: each cluster is res'
    """
    if not strata.across_folds:
        return ()
    return ("clusters span folds: each cluster is resampled whole over all folds (not within "
            "folds), so fold sizes vary between resamples; per-fold figures are less "
            "reliable, and the model was trained on samples of the clusters it was tested on",)

r"""The analysis layer: two models scored on the same samples, compared pair by pair.

The joint tensor (:func:`foldcorr.tensor.joint_tally`) counts samples by
(fold, actual, predicted by A, predicted by B). Both models' confusion tensors
are its margins, so everything about the pair lives in its cells (resampled,
and intervals read, with :mod:`foldcorr.analysis.resampling`):

- the *paired bootstrap* resamples the joint cells (stratified by fold), which
  keeps each sample's two predictions together, and reads the difference of R_K
  (B minus A) off each resample;
- the *paired permutation test* swaps the two predictions of each sample with
  probability 1/2. For a joint cell (i, j, k) holding n samples the number
  swapped is Binomial(n, 1/2), and swapped samples move to cell (i, k, j); so
  each permutation costs one binomial draw per off-diagonal joint cell.

Nothing here reads files or prints; randomness comes from one ``seed``.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from functools import cached_property, partial

import numpy as np
import xarray as xr

from foldcorr.errors import (DEFAULT_SEED, Recorder, UndefinedMetricWarning, check_choice,
                             places_text, undefined_places)
from foldcorr.metrics import ovr_mcc, rk
from foldcorr.tensor import (ACTUAL, FOLD, JOINT_DIMS, PREDICTED, ClusterCells, pool,
                             validate_joint)
from foldcorr.analysis.clustered import (
    ClusterStrata, check_cells, cluster_notes, dense_cells, same_samples, scatter,
    scatter_sparse,
    sparse_cells,
)
from foldcorr.analysis.support import blank_thin_classes, thin_classes, thin_note
from foldcorr.analysis.intervals import interval
from foldcorr.analysis.resampling import (
    RESAMPLE, check_level, check_resamples, resample_blocks, whole_counts,
)

__all__ = ["Comparison", "compare_models", "compare_cells", "PairStrata", "paired_draws",
           "permutation_draws"]


@dataclass(frozen=True)
class Comparison:
    """Two models on the same samples: R_K of each, the paired difference B - A.

    Attributes
    ----------
    n : int
        Number of samples.
    classes : list
        Class labels.
    rk_a, rk_b : float
        Pooled R_K of model A and model B.
    difference : float
        ``rk_b - rk_a``.
    ci : tuple of float
        Paired percentile bootstrap interval of the difference.
    p_value : float
        Two-sided paired permutation (sign-flip) p-value of the difference.
    level : float
        Level of the intervals.
    n_resamples, n_permutations : int
        Bootstrap resamples and permutations drawn.
    seed : int or None
        Seed used (None when not fixed).
    per_class : xarray.Dataset
        Dim ``class``: ``mcc_a``, ``mcc_b``, ``difference`` (one-vs-rest MCC,
        B - A), ``low``, ``high`` (paired interval), pooled over folds.
    folds : xarray.Dataset or None
        Dim ``fold``: ``rk_a``, ``rk_b``, ``difference``, ``low``, ``high``; None
        without folds.
    draws : xarray.DataArray or None
        Bootstrap draws of the pooled difference, when kept.
    warnings : tuple of str
        Undefined values, in plain language.
    n_clusters : int or None
        Clusters resampled whole, or None without ``cluster``.
    design_effect : float or None
        With clusters: variance of the cluster bootstrap of the pooled
        difference over that of the sample-by-sample one.
    """

    n: int
    classes: list
    rk_a: float
    rk_b: float
    difference: float
    ci: tuple[float, float]
    p_value: float
    level: float
    n_resamples: int
    n_permutations: int
    seed: int | None
    per_class: xr.Dataset
    folds: xr.Dataset | None
    draws: xr.DataArray | None = None
    warnings: tuple[str, ...] = field(default_factory=tuple)
    n_clusters: int | None = None
    design_effect: float | None = None

    @property
    def decided(self) -> bool:
        """Whether the data tell the models apart: the interval excludes 0 and p < 1 - level."""
        low, high = self.ci
        return bool((low > 0 or high < 0) and self.p_value < 1 - self.level)

    @property
    def better(self) -> str | None:
        """``"a"`` or ``"b"`` when :attr:`decided`, else None."""
        if not self.decided:
            return None
        return "b" if self.difference > 0 else "a"

    def __rich__(self):
        from foldcorr.report.compare import compare_report  # rendering lives in the report layer
        from foldcorr.report.text import render_rich

        return render_rich(compare_report(self))

    def _repr_html_(self) -> str:
        from foldcorr.report.notebook import html_fragment  # rendering lives in the report layer

        return html_fragment(self)

    def plot(self, kind: str = "difference", ax=None, **options):
        """Draw one plot of this result with matplotlib (the ``plot`` extra).

        Parameters
        ----------
        kind : str, default "difference"
            A plot of ``foldcorr.report.plots.PLOTS["Comparison"]``.
        ax : matplotlib.axes.Axes, optional
            Draw there and return it; without it, a new figure is returned,
            which shows itself inline in a notebook.
        **options
            Options of the plot function (``docs/plots.md``).

        Raises
        ------
        OptionError
            On a kind this result has no plot for.
        MissingDependencyError
            When matplotlib is not installed.

        Examples
        --------
        >>> from foldcorr.tensor import joint_tally
        >>> c = compare_models(joint_tally(list("aabbcc"), list("abbbcc"), list("aabbca")),
        ...                    n_resamples=200, seed=1)
        >>> c.plot().axes[0].get_xlabel()
        'model B minus model A'
        """
        from foldcorr.report.plots import plot  # drawing lives in the report layer

        return plot(self, kind, ax=ax, **options)

    def __repr__(self) -> str:
        low, high = self.ci
        return (f"Comparison(n={self.n}, {len(self.classes)} classes, R_K a={self.rk_a:.4f}, "
                f"b={self.rk_b:.4f})\n  b - a = {self.difference:.4f} "
                f"[{low:.4f}, {high:.4f}], p={self.p_value:.4g}, better: {self.better}")


class PairStrata:
    """Resamples of a joint tensor's sparse cells, read as the two models' tensors.

    ``strata`` is a :class:`foldcorr.analysis.clustered.ClusterStrata` over
    ``(actual, predicted_a, predicted_b)`` cells; every row is decoded once to
    its fold, actual class and the two predictions, so each model's tensor of a
    block of resamples is one ``numpy.bincount`` (:func:`scatter`), and a
    sign-flip permutation moves rows between the two models.

    Examples
    --------
    >>> from foldcorr.tensor import cluster_tally
    >>> cells = cluster_tally([0, 1, 1], [0, 1, 0], [0, 0, 1], cluster=[0, 1, 2])
    >>> p = PairStrata.of(cells, clustered=False)
    >>> a, b = p.tensors(p.strata.counts[None])
    >>> a.values.tolist(), b.values.tolist()
    ([[[1, 0], [1, 1]]], [[[1, 0], [1, 1]]])
    """

    def __init__(self, strata: ClusterStrata):
        self.strata = strata
        cells = strata.cells
        self.k = k = cells.k
        self.lead = [] if cells.folds is None else [FOLD]
        self.actual, self.a, self.b = strata.cell // (k * k), (strata.cell // k) % k, strata.cell % k
        classes = cells.classes
        self.coords = {ACTUAL: classes, PREDICTED: classes}
        if self.lead:
            self.coords[FOLD] = cells.folds

    @classmethod
    def of(cls, cells: ClusterCells, *, clustered: bool) -> PairStrata:
        return cls(ClusterStrata.of(cells, clustered=clustered))

    def tensors(self, draws: np.ndarray, flip=None):
        """Model A and B tensors (resample, [fold,] actual, predicted) from row counts.

        ``flip`` (resample, rows) swaps the two predictions of the rows where True.
        """
        k, size = self.k, draws.shape[0]
        folds = self.strata.cells.n_folds
        base = (self.strata.fold * k + self.actual) * k
        pa, pb = (self.a, self.b) if flip is None else \
            (np.where(flip, self.b, self.a), np.where(flip, self.a, self.b))
        shape = (*([folds] if self.lead else []), k, k)
        dims = (RESAMPLE, *self.lead, ACTUAL, PREDICTED)
        if self.sparse:
            known = self.model_cells if flip is None else (None, None)  # flips move cells
            return [xr.DataArray(scatter_sparse(draws, base + pred, shape, cells=c), dims=dims,
                                 coords=self.coords) for pred, c in zip((pa, pb), known)]
        return [xr.DataArray(scatter(draws, base + pred, folds * k * k).reshape(size, *shape),
                             dims=dims, coords=self.coords) for pred in (pa, pb)]

    @cached_property
    def model_cells(self) -> list:
        """Each model's cells as :func:`sparse_cells` finds them, once for every block."""
        base = (self.strata.fold * self.k + self.actual) * self.k
        return [sparse_cells(base + pred) for pred in (self.a, self.b)]

    @property
    def sparse(self) -> bool:
        """Whether resampled tensors are sparse: when the joint rows are fewer than a
        quarter of the cells of both models' tensors (many classes)."""
        return 4 * len(self.strata.counts) < self.strata.cells.n_folds * self.k * self.k

    @property
    def block_cells(self) -> int:
        """Cells one resample occupies while drawn: rows, or both models' tensors."""
        if self.sparse:
            return 4 * len(self.strata.counts)
        return max(len(self.strata.counts), 2 * self.strata.cells.n_folds * self.k * self.k)

    def observed(self):
        """Model A and B tensors of the observed samples."""
        return [t.isel({RESAMPLE: 0}, drop=True)
                for t in self.tensors(self.strata.counts[None].astype(np.int64))]


def compare_models(joint: xr.DataArray, *, n_resamples: int = 2000, level: float = 0.95,
                   seed: int | np.random.Generator | None = DEFAULT_SEED,
                   n_permutations: int | None = None,
                   undefined: str = "zero", keep_draws: bool = False,
                   cluster: ClusterCells | None = None) -> Comparison:
    r"""Paired comparison of two models' R_K on the same samples.

    Parameters
    ----------
    joint : xarray.DataArray
        Joint tensor from :func:`foldcorr.tensor.joint_tally`.
    n_resamples : int, default 2000
        Paired bootstrap resamples (at least 100).
    level : float, default 0.95
        Level of the intervals, strictly between 0 and 1.
    seed : int, numpy.random.Generator or None, optional
        Seed of the one generator used for resamples and permutations
        (default :data:`foldcorr.errors.DEFAULT_SEED`: the same input gives the same result).
    n_permutations : int, optional
        Random sign-flip permutations (at least 100); default ``n_resamples``.
    undefined : {"zero", "nan"}, default "zero"
        Convention for undefined R_K and MCC.
    keep_draws : bool, default False
        Keep the bootstrap draws of the pooled difference.
    cluster : ClusterCells, optional
        The same samples by cluster, from
        ``cluster_tally(truth, pred_a, pred_b, cluster=ids, folds=...)``:
        the bootstrap resamples whole clusters (within folds when every
        cluster lies in one fold) and the permutation test swaps the two
        predictions of a whole cluster at once. The result gives
        ``n_clusters`` and ``design_effect`` (of the pooled difference).

    Returns
    -------
    Comparison

    Raises
    ------
    OptionError
        On a level outside (0, 1) or fewer than 100 resamples or permutations.
    InvalidTensorError
        On a malformed joint tensor, a fold with no samples, or a ``cluster``
        that does not count the samples of ``joint``.

    Notes
    -----
    *Paired bootstrap*: every fold's joint cells are drawn as
    Multinomial(N_f, J_f / N_f); each model's tensor is a margin of the draw,
    and the percentile interval of :math:`R_K^B - R_K^A` over the draws is
    reported, pooled, per class (one-vs-rest MCC) and per fold.

    *Permutation test*: under the null hypothesis that the two predictions of
    each sample are exchangeable, swapping them leaves the distribution
    unchanged. For each off-diagonal joint cell (i, j, k), j != k, with n
    samples, :math:`S \sim \mathrm{Binomial}(n, 1/2)` samples move to
    (i, k, j). The p-value is
    :math:`(1 + \#\{|d^*| \ge |d|\}) / (1 + P)` over P permutations [2]_.
    The null is exchangeability of the two predictions, a stronger statement
    than equal R_K: models with equal R_K that err on different samples are
    not exchangeable. With clusters the unit swapped is a cluster.

    References
    ----------
    .. [1] B. Efron, R. J. Tibshirani, *An Introduction to the Bootstrap*,
       Chapman & Hall (1993), ch. 15.
    .. [2] B. Phipson, G. K. Smyth, "Permutation p-values should never be
       zero", Stat. Appl. Genet. Mol. Biol. 9 (2010) art. 39.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> truth = rng.integers(0, 3, 400)
    >>> a = np.where(rng.random(400) < 0.5, truth, rng.integers(0, 3, 400))
    >>> b = np.where(rng.random(400) < 0.9, truth, rng.integers(0, 3, 400))
    >>> from foldcorr.tensor import joint_tally
    >>> c = compare_models(joint_tally(truth, a, b), n_resamples=500, seed=1)
    >>> c.difference > 0, c.ci[0] > 0, c.p_value < 0.01, c.better
    (True, True, True, 'b')
    """
    j = whole_counts(validate_joint(joint), what="the paired comparison")
    if cluster is None:
        cells = dense_cells(j)
    else:
        cells = check_cells(cluster, JOINT_DIMS)
        same_samples(j, cells)
    return compare_cells(cells, clustered=cluster is not None, n_resamples=n_resamples,
                         level=level, seed=seed, n_permutations=n_permutations,
                         undefined=undefined, keep_draws=keep_draws)


def compare_cells(cells: ClusterCells, *, clustered: bool, n_resamples: int = 2000,
                  level: float = 0.95, seed=None, n_permutations: int | None = None,
                  undefined: str = "zero", keep_draws: bool = False, rng=None) -> Comparison:
    """The paired comparison of :func:`compare_models`, from sparse joint cells.

    ``clustered`` resamples and swaps whole clusters of ``cells``; otherwise
    single samples (the cluster codes are then ignored). ``rng``, when given,
    is used instead of a generator made from ``seed`` (``seed`` is then only
    recorded), so several comparisons can share one stream of randoms.

    Examples
    --------
    >>> from foldcorr.tensor import cluster_tally
    >>> y = [0, 1, 2] * 30
    >>> cells = cluster_tally(y, y[1:] + y[:1], y, cluster=range(90))
    >>> c = compare_cells(cells, clustered=False, n_resamples=200, seed=0)
    >>> round(c.difference, 3), c.better
    (1.5, 'b')
    """
    level = check_level(level)
    n = check_resamples(n_resamples)
    n_perm = n if n_permutations is None else check_resamples(n_permutations,
                                                              name="n_permutations")
    check_choice("undefined", undefined, ("zero", "nan"))
    stat_rk = partial(rk, undefined=undefined)
    stat_mcc = partial(ovr_mcc, undefined=undefined)
    rng = np.random.default_rng(seed) if rng is None else rng
    pair = PairStrata.of(cells, clustered=clustered)
    t_a, t_b = pair.observed()
    notes: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UndefinedMetricWarning)
        pa, pb = (pool(t_a), pool(t_b)) if FOLD in t_a.dims else (t_a, t_b)
        rk_a, rk_b = float(stat_rk(pa)), float(stat_rk(pb))
        mcc_a, mcc_b = stat_mcc(pa), stat_mcc(pb)
        fold_a = stat_rk(t_a) if FOLD in t_a.dims else None
        fold_b = stat_rk(t_b) if FOLD in t_b.dims else None
    for w in caught:
        notes.append(f"comparison: {w.message}")
    difference = rk_b - rk_a
    extra, point_notes = {}, bool(notes)
    # each statistic records its own undefined values, so that each note names its own
    drawn = {"R_K": Recorder(stat_rk), "one-vs-rest MCC": Recorder(stat_mcc),
             "R_K under permutation": Recorder(stat_rk)}
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UndefinedMetricWarning)
        d_rk, d_mcc, d_fold = paired_draws(pair, rng, n, drawn["R_K"], drawn["one-vs-rest MCC"])
        perm = permutation_draws(pair, rng, n_perm, drawn["R_K under permutation"])
        if clustered:
            iid = paired_draws(PairStrata.of(cells, clustered=False), rng, n, stat_rk, None)[0]
            var_iid = float(np.nanvar(iid.values))
            extra = {"n_clusters": cells.n_clusters, "design_effect": (
                float(np.nanvar(d_rk.values)) / var_iid if var_iid > 0 else float("nan"))}
            notes.extend(cluster_notes(pair.strata))
    if not point_notes:
        value = '0' if undefined == 'zero' else 'NaN'
        for what, rec in drawn.items():
            if rec.caught:
                places = places_text(undefined_places(rec.caught, skip=("resample", "permutation")))
                notes.append(f"comparison: {what} undefined (0/0) in some "
                             f"{'permutations' if 'permutation' in what else 'resamples'}"
                             f"{f' at {places}' if places else ''}; they count as {value}")
    tol = 1e-12 * max(1.0, abs(difference))
    p_value = (1 + int(np.sum(np.abs(perm) >= abs(difference) - tol))) / (1 + n_perm)
    est = xr.DataArray(difference)
    low, high, undefined_mask = interval(d_rk, est, level, "percentile")
    ci = (float(low), float(high))
    est_c = (mcc_b - mcc_a).rename("difference")
    low_c, high_c, _ = interval(d_mcc, est_c, level, "percentile")
    thin = thin_classes(pa) & thin_classes(pb)
    notes.extend(thin_note(list(cells.classes), thin, "per-class intervals"))
    per_class = xr.Dataset({
        "mcc_a": mcc_a, "mcc_b": mcc_b, "difference": est_c,
        "low": blank_thin_classes(est_c.copy(data=low_c), thin),
        "high": blank_thin_classes(est_c.copy(data=high_c), thin),
    })
    folds = None
    if fold_a is not None:
        est_f = (fold_b - fold_a).rename("difference")
        low_f, high_f, _ = interval(d_fold, est_f, level, "percentile")
        folds = xr.Dataset({"rk_a": fold_a, "rk_b": fold_b, "difference": est_f,
                            "low": est_f.copy(data=low_f), "high": est_f.copy(data=high_f)})
    if undefined_mask.any():
        notes.append("comparison: the R_K difference is undefined (NaN); no interval given")
    return Comparison(
        n=int(cells.count.sum()), classes=list(cells.classes), rk_a=rk_a, rk_b=rk_b,
        difference=difference, ci=ci, p_value=float(p_value), level=level, n_resamples=n,
        n_permutations=n_perm, seed=seed if isinstance(seed, (int, np.integer)) else None,
        per_class=per_class, folds=folds, draws=d_rk if keep_draws else None,
        warnings=tuple(dict.fromkeys(notes)), **extra,
    )


def paired_draws(pair: PairStrata, rng, n, stat_rk, stat_mcc):
    """Bootstrap draws of the R_K difference B - A: pooled, per class (MCC) and per fold.

    Returns ``(pooled, per_class, per_fold)``; ``per_class`` is None without
    ``stat_mcc`` and ``per_fold`` None without folds.

    Examples
    --------
    >>> from foldcorr.tensor import cluster_tally
    >>> y = [0, 1, 2] * 30
    >>> pair = PairStrata.of(cluster_tally(y, y, y, cluster=range(90)), clustered=False)
    >>> d, _, _ = paired_draws(pair, np.random.default_rng(0), 10, rk, None)
    >>> d.values.tolist() == [0.0] * 10
    True
    """
    lead = pair.lead
    rks, mccs, folds = [], [], []
    for size in resample_blocks(n, pair.block_cells):
        ta, tb = pair.tensors(pair.strata.draw(rng, size))
        pa, pb = (pool(ta), pool(tb)) if lead else (ta, tb)
        rks.append(stat_rk(pb) - stat_rk(pa))
        if stat_mcc is not None:
            mccs.append(stat_mcc(pb) - stat_mcc(pa))
        if lead:
            folds.append(stat_rk(tb) - stat_rk(ta))
    cat = partial(xr.concat, dim=RESAMPLE)
    return cat(rks), (cat(mccs) if mccs else None), (cat(folds) if folds else None)


def permutation_draws(pair: PairStrata, rng, n, stat_rk) -> np.ndarray:
    """The pooled R_K difference B - A under ``n`` random sign-flip permutations.

    Without clusters each sample's predictions are swapped with probability
    1/2 (a Binomial(n, 1/2) per off-diagonal joint cell); with clusters each
    cluster's at once.

    Examples
    --------
    >>> from foldcorr.tensor import cluster_tally
    >>> y = [0, 1, 2] * 30
    >>> pair = PairStrata.of(cluster_tally(y, y, y[1:] + y[:1], cluster=range(90)),
    ...                      clustered=False)
    >>> d = permutation_draws(pair, np.random.default_rng(0), 50, rk)
    >>> d.shape, bool(abs(d.mean()) < 0.3)
    ((50,), True)
    """
    strata = pair.strata
    if strata.clustered:
        return _cluster_flips(pair, rng, n, stat_rk)
    k = pair.k
    code, inverse = np.unique(strata.cell, return_inverse=True)
    pooled = np.bincount(inverse, weights=strata.counts, minlength=len(code)).astype(np.int64)
    i, a, b = code // (k * k), (code // k) % k, code % k
    if pair.sparse:
        return _sparse_flips(rng, n, stat_rk, (i, a, b, pooled), k, pair.coords)
    off = a != b
    i, a, b, counts = i[off], a[off], b[off], pooled[off]
    t_a, t_b = pair.observed()
    base_a = (t_a.sum(FOLD) if pair.lead else t_a).values
    base_b = (t_b.sum(FOLD) if pair.lead else t_b).values
    coords = {ACTUAL: pair.coords[ACTUAL], PREDICTED: pair.coords[PREDICTED]}
    dims = (RESAMPLE, ACTUAL, PREDICTED)
    out = []
    for size in resample_blocks(n, max(k * k, counts.size)):
        swapped = rng.binomial(counts, 0.5, size=(size, counts.size))
        delta = (scatter(swapped, i * k + b, k * k)
                 - scatter(swapped, i * k + a, k * k)).reshape(size, k, k)
        ta = xr.DataArray(base_a[None] + delta, dims=dims, coords=coords)
        tb = xr.DataArray(base_b[None] - delta, dims=dims, coords=coords)
        out.append((stat_rk(tb) - stat_rk(ta)).values)
    return np.concatenate(out) if out else np.zeros(0)


def _sparse_flips(rng, n, stat_rk, rows, k, coords) -> np.ndarray:
    """Sign-flip permutations as sparse tensors of the joint rows: the same binomial draws
    as the dense path, O(rows) per permutation instead of O(K^2)."""
    i, a, b, counts = rows
    off = np.flatnonzero(a != b)
    coords = {ACTUAL: coords[ACTUAL], PREDICTED: coords[PREDICTED]}
    dims = (RESAMPLE, ACTUAL, PREDICTED)
    out = []
    cells = [sparse_cells(np.r_[i * k + x, i * k + y]) for x, y in ((a, b), (b, a))]
    for size in resample_blocks(n, 4 * len(counts)):
        swapped = np.zeros((size, len(counts)), np.int64)
        swapped[:, off] = rng.binomial(counts[off], 0.5, size=(size, len(off)))
        kept = np.concatenate([counts[None] - swapped, swapped], axis=1)
        ta, tb = (xr.DataArray(scatter_sparse(kept, None, (k, k), cells=c),
                               dims=dims, coords=coords) for c in cells)
        out.append((stat_rk(tb) - stat_rk(ta)).values)
    return np.concatenate(out) if out else np.zeros(0)


def _cluster_flips(pair: PairStrata, rng, n, stat_rk) -> np.ndarray:
    """Permutations that swap the two predictions of whole clusters."""
    strata = pair.strata
    out = []
    for size in resample_blocks(n, pair.block_cells):
        flip = rng.random((size, strata.cells.n_clusters)) < 0.5
        draws = np.broadcast_to(strata.counts, (size, len(strata.counts)))
        ta, tb = pair.tensors(draws, flip=flip[:, strata.unit])
        if pair.lead:
            ta, tb = pool(ta), pool(tb)
        out.append((stat_rk(tb) - stat_rk(ta)).values)
    return np.concatenate(out)

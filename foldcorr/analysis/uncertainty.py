r"""The analysis layer: how sure a figure is, and whether the folds agree.

Resampling N samples with replacement makes the cell counts of a confusion
tensor Multinomial(N, C / N). So the bootstrap here draws the nonzero cells of
the tensor directly, O(B * nnz) work instead of O(B * N), with exactly the
distribution of per-sample resampling. Each slice over the leading dims (each
fold, each label, ...) is drawn on its own and keeps its own total (resampling
is stratified by fold); the statistic is then applied once to the whole block
of resampled tensors, since every metric broadcasts over leading dims.

Weighted tensors are refused, whatever their values: the cells no longer say
how many samples they hold, and resampling them as if each unit of weight were
a sample would give intervals of the wrong width. A tensor counts as weighted
when its counts are floating point (a weighted tally is float64, an unweighted
one int64) or it records a ``weight_column`` (see :func:`whole_counts`).

Nothing here reads files or prints. Randomness comes from one keyword-only
``seed``, normalised once with :func:`numpy.random.default_rng`.
"""

from __future__ import annotations

import math
import numbers
import warnings
from dataclasses import dataclass, field
from functools import partial

import numpy as np
import xarray as xr

from foldcorr.errors import (
    InvalidTensorError,
    OptionError,
    UndefinedMetricWarning,
    check_choice,
)
from foldcorr.metrics import decompose, ovr_mcc, rk
from foldcorr.tensor import ACTUAL, FOLD, PREDICTED, validate_tensor

__all__ = [
    "RESAMPLE",
    "METHODS",
    "MIN_RESAMPLES",
    "BootstrapResult",
    "FoldStatistics",
    "Uncertainty",
    "resample_cells",
    "bootstrap",
    "bootstrap_difference",
    "fold_statistics",
    "drag",
    "summarise_uncertainty",
]

#: Name of the leading dim that indexes bootstrap resamples.
RESAMPLE = "resample"
#: Interval methods accepted by :func:`bootstrap`.
METHODS = ("percentile", "bca")
#: Fewest resamples accepted for an interval.
MIN_RESAMPLES = 100

# Cells per block of resampled tensors handed to the statistic at once.
_BLOCK_CELLS = 1 << 22


# ----------------------------------------------------------------------------
# validation


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
    """Return ``n_resamples`` as an int, or raise unless it is a whole number >= ``minimum``.

    Examples
    --------
    >>> check_resamples(2000)
    2000
    >>> check_resamples(10)
    Traceback (most recent call last):
    ...
    foldcorr.errors.OptionError: `n_resamples` must be a whole number of at least 100; got 10
    """
    ok = isinstance(n_resamples, numbers.Integral) and not isinstance(n_resamples, bool)
    if not ok or int(n_resamples) < minimum:
        raise OptionError(
            f"`{name}` must be a whole number of at least {minimum}; got {n_resamples!r}"
        )
    return int(n_resamples)


def _where(t: xr.DataArray, index) -> str:
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
    values = np.asarray(t.values)
    if values.dtype != np.int64:
        t = t.copy(data=values.astype(np.int64))
    return t


def _weighted_reason(t: xr.DataArray) -> str | None:
    """Why ``t`` counts as a weighted tensor, or None when it holds sample counts."""
    column = t.attrs.get("weight_column")
    if column:
        return f"it was tallied with the weight column {column!r}"
    values = np.asarray(t.values)
    if np.issubdtype(values.dtype, np.floating):
        frac = values != np.round(values)
        cells = np.argwhere(frac) if frac.any() else np.argwhere(values != 0)
        at = ""
        if len(cells):
            index = tuple(cells[0])
            at = f", e.g. {_py(values[index])!r} at {_where(t, index)}"
        return (f"{values.dtype} counts{at}, as a weighted tally has; if these are plain "
                "sample counts, give them an integer dtype with .astype('int64')")
    return None


def _py(value):
    return value.item() if isinstance(value, np.generic) else value


# ----------------------------------------------------------------------------
# multinomial resampling of cells


@dataclass(frozen=True)
class _Strata:
    """The nonzero cells of every slice over the leading dims, padded to one width.

    ``lead`` are the leading dims (one stratum per combination), ``cell_dims``
    the trailing class dims; ``index[s, r]`` is the flat cell of the r-th
    nonzero cell of stratum s (padding points one past the last cell) and
    ``counts[s, r]`` its count (0 for padding).
    """

    tensor: xr.DataArray
    lead: tuple
    cell_dims: tuple
    index: np.ndarray
    counts: np.ndarray

    @classmethod
    def of(cls, t: xr.DataArray, cell_dims) -> _Strata:
        lead = tuple(d for d in t.dims if d not in cell_dims)
        t = t.transpose(*lead, *cell_dims)
        n_cells = int(np.prod([t.sizes[d] for d in cell_dims]))
        flat = t.values.reshape(-1, n_cells)
        totals = flat.sum(axis=1)
        if (totals == 0).any():
            s = int(np.flatnonzero(totals == 0)[0])
            index = np.unravel_index(s, [t.sizes[d] for d in lead]) if lead else ()
            where = _where(t, index) if lead else "the whole tensor"
            raise InvalidTensorError(
                f"cannot resample: {where} holds no samples; drop that slice first"
            )
        nonzero = flat > 0
        width = max(int(nonzero.sum(axis=1).max()), 1)
        order = np.argsort(~nonzero, axis=1, kind="stable")[:, :width]
        keep = np.take_along_axis(nonzero, order, axis=1)
        counts = np.where(keep, np.take_along_axis(flat, order, axis=1), 0)
        index = np.where(keep, order, n_cells)
        return cls(t, lead, tuple(cell_dims), index, counts.astype(np.int64))

    @property
    def n_cells(self) -> int:
        return int(np.prod([self.tensor.sizes[d] for d in self.cell_dims]))

    def draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        """Multinomial draws of every stratum's cells, shape (size, strata, width)."""
        totals = self.counts.sum(axis=1)
        probs = self.counts / totals[:, None]
        return rng.multinomial(totals, probs, size=(size, len(totals)))

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


def resample_cells(t, n_resamples: int, *, seed=None) -> xr.DataArray:
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
    strata = _Strata.of(whole_counts(t, what="resampling"), (ACTUAL, PREDICTED))
    return strata.dense(strata.draw(np.random.default_rng(seed), n))


# ----------------------------------------------------------------------------
# bootstrap results


@dataclass(frozen=True)
class BootstrapResult:
    """A point estimate with a bootstrap interval.

    Attributes
    ----------
    estimate, low, high : xarray.DataArray
        The statistic of the observed tensor and the interval ends; the same
        dims as the statistic returns (none for R_K, ``class`` for per-class
        figures, ``fold`` when not pooled, ...).
    level : float
        Confidence level, e.g. 0.95.
    method : str
        ``"percentile"`` or ``"bca"``.
    n_resamples : int
        Number of resamples.
    draws : xarray.DataArray or None
        The statistic of every resample (dim ``resample`` first), when kept.
    pooled : bool
        Whether the statistic was applied to the resamples summed over folds.
    warnings : tuple of str
        Undefined values met in the resamples, in plain language.
    """

    estimate: xr.DataArray
    low: xr.DataArray
    high: xr.DataArray
    level: float
    method: str
    n_resamples: int
    draws: xr.DataArray | None = None
    pooled: bool = True
    warnings: tuple[str, ...] = field(default_factory=tuple)

    @property
    def ci(self) -> tuple[xr.DataArray, xr.DataArray]:
        """The interval as a ``(low, high)`` pair."""
        return self.low, self.high

    def to_dataset(self) -> xr.Dataset:
        """Estimate and interval ends as one Dataset (``estimate``, ``low``, ``high``).

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> res = bootstrap(confusion_tensor([[40, 10], [5, 45]], [0, 1]), seed=1)
        >>> sorted(res.to_dataset().data_vars)
        ['estimate', 'high', 'low']
        """
        return xr.Dataset({"estimate": self.estimate, "low": self.low, "high": self.high})


def _label(statistic) -> str:
    while isinstance(statistic, partial):
        statistic = statistic.func
    name = getattr(statistic, "__name__", None) or "the statistic"
    return {"rk": "R_K", "ovr_mcc": "one-vs-rest MCC", "drag": "drag"}.get(name, name)


def _apply(statistic, x: xr.DataArray, label: str) -> xr.DataArray:
    out = statistic(x)
    if isinstance(out, xr.Dataset) or not isinstance(out, xr.DataArray):
        raise OptionError(
            f"the statistic must return an xarray.DataArray; {label} returned "
            f"{type(out).__name__!r}"
        )
    return out


def _pool_fold(x: xr.DataArray, pooled: bool) -> xr.DataArray:
    return x.sum(FOLD) if pooled and FOLD in x.dims else x


def _blocks(total: int, cells: int):
    step = max(1, _BLOCK_CELLS // max(cells, 1))
    for start in range(0, total, step):
        yield min(step, total - start)


def _draws(strata: _Strata, rng, n, jobs) -> dict:
    """The statistic of every resample, for several statistics sharing the resamples."""
    out = {name: [] for name in jobs}
    for size in _blocks(n, strata.tensor.size):
        block = strata.dense(strata.draw(rng, size))
        for name, (statistic, pooled, label) in jobs.items():
            values = _apply(statistic, _pool_fold(block, pooled), label)
            if RESAMPLE not in values.dims:
                raise OptionError(
                    f"the statistic must broadcast over leading dims; {label} dropped the "
                    f"{RESAMPLE!r} dim (returned dims {values.dims!r})"
                )
            out[name].append(values)
    return {name: xr.concat(parts, RESAMPLE) for name, parts in out.items()}


def _ndtr(x):
    from scipy.special import ndtr

    return ndtr(x)


def _ndtri(x):
    from scipy.special import ndtri

    return ndtri(x)


def _quantile_at(sorted_draws: np.ndarray, q: np.ndarray) -> np.ndarray:
    """Per-element quantiles (linear interpolation) of draws sorted along axis 0."""
    b = sorted_draws.shape[0]
    pos = np.clip(q, 0.0, 1.0) * (b - 1)
    lo = np.floor(pos).astype(np.int64)
    hi = np.minimum(lo + 1, b - 1)
    frac = pos - lo
    below = np.take_along_axis(sorted_draws, lo[None], axis=0)[0]
    above = np.take_along_axis(sorted_draws, hi[None], axis=0)[0]
    return below + frac * (above - below)


def _interval(draws: xr.DataArray, estimate: xr.DataArray, level: float, method: str,
              moments=None):
    """Interval ends (numpy arrays shaped like the estimate) and the undefined mask."""
    d = draws.transpose(RESAMPLE, *estimate.dims).values.astype(float)
    est = np.asarray(estimate.values, dtype=float)
    b = d.shape[0]
    undefined = np.isnan(d).any(axis=0) | np.isnan(est)
    d_sorted = np.sort(np.where(np.isnan(d), 0.0, d), axis=0)
    alpha = 1.0 - level
    if method == "percentile":
        q_lo = np.full(est.shape, alpha / 2)
        q_hi = np.full(est.shape, 1 - alpha / 2)
    else:
        num, den = moments
        with np.errstate(divide="ignore", invalid="ignore"):
            accel = np.where(den > 0, num / (6.0 * den**1.5), 0.0)
        accel = np.nan_to_num(accel)
        share = ((d < est).sum(axis=0) + (d <= est).sum(axis=0)) / (2.0 * b)
        z0 = _ndtri(np.clip(share, 0.5 / b, 1 - 0.5 / b))
        bounds = []
        for z in (_ndtri(alpha / 2), _ndtri(1 - alpha / 2)):
            bounds.append(_ndtr(z0 + (z0 + z) / (1 - accel * (z0 + z))))
        q_lo, q_hi = bounds
        # a (z0 + z) at or beyond 1 leaves the adjusted level undefined
        undefined = undefined | ~np.isfinite(q_lo) | ~np.isfinite(q_hi)
        q_lo, q_hi = np.nan_to_num(q_lo, nan=0.5), np.nan_to_num(q_hi, nan=0.5)
    low = _quantile_at(d_sorted, np.asarray(q_lo, float))
    high = _quantile_at(d_sorted, np.asarray(q_hi, float))
    low = np.where(undefined, np.nan, low)
    high = np.where(undefined, np.nan, high)
    return low, high, undefined


def _like(estimate: xr.DataArray, values: np.ndarray, suffix: str) -> xr.DataArray:
    name = f"{estimate.name}_{suffix}" if estimate.name else suffix
    return estimate.copy(data=np.asarray(values, dtype=float)).rename(name)


def _draw_notes(label: str, caught, undefined_mask, estimate, n) -> tuple[str, ...]:
    notes = []
    if undefined_mask.any():
        if estimate.dims:
            index = np.argwhere(undefined_mask)[0]
            where = " at " + _where(estimate, index)
            more = int(undefined_mask.sum()) - 1
            where += f" and {more} more" if more else ""
        else:
            where = ""
        notes.append(f"bootstrap of {label}: undefined (NaN) in resamples or estimate{where}; "
                     "no interval given there")
    elif any(issubclass(w.category, UndefinedMetricWarning) for w in caught):
        notes.append(f"bootstrap of {label}: undefined (0/0) in some of the {n} resamples; "
                     "those resamples count as 0 (undefined='zero'), so the interval mixes "
                     "them in")
    return tuple(notes)


def _bootstrap_many(t, jobs: dict, *, n_resamples, level, method, seed, keep_draws):
    """Bootstrap several statistics on the same resamples of ``t``.

    ``jobs`` maps a name to ``(statistic, pooled)``; returns name -> BootstrapResult.
    """
    level = check_level(level)
    n = check_resamples(n_resamples)
    check_choice("method", method, METHODS)
    t = whole_counts(t)
    strata = _Strata.of(t, (ACTUAL, PREDICTED))
    rng = np.random.default_rng(seed)
    jobs = {name: (stat, bool(pooled), _label(stat)) for name, (stat, pooled) in jobs.items()}
    estimates = {name: _apply(stat, _pool_fold(t, pooled), label)
                 for name, (stat, pooled, label) in jobs.items()}
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UndefinedMetricWarning)
        draws = _draws(strata, rng, n, jobs)
        moments = {}
        if method == "bca":
            for name, (stat, pooled, label) in jobs.items():
                moments[name] = _jack_moments(t, stat, pooled, estimates[name], label)
    results = {}
    for name, (stat, pooled, label) in jobs.items():
        est = estimates[name]
        mom = moments.get(name)
        if mom is not None:
            mom = tuple(m.transpose(*est.dims).values for m in mom)
        low, high, undefined = _interval(draws[name], est, level, method, mom)
        results[name] = BootstrapResult(
            estimate=est, low=_like(est, low, "low"), high=_like(est, high, "high"),
            level=level, method=method, n_resamples=n,
            draws=draws[name].transpose(RESAMPLE, *est.dims) if keep_draws else None,
            pooled=pooled, warnings=_draw_notes(label, caught, undefined, est, n),
        )
    for note in {w for r in results.values() for w in r.warnings}:
        warnings.warn(note, UndefinedMetricWarning, stacklevel=3)
    return results


# ----------------------------------------------------------------------------
# jackknife acceleration for BCa


def _jack_moments(t: xr.DataArray, statistic, pooled: bool, estimate, label: str):
    """Jackknife moments (num, den) of the BCa acceleration, O(nnz) statistic evaluations.

    Deleting any one sample of a cell gives the same tensor, so the jackknife
    runs over the nonzero cells of the statistic's input, each weighted by its
    count. Each stratum (fold, when resampling is stratified) contributes
    ``sum w U^3 / n^3`` and ``sum w U^2 / n^2`` with ``U = (n - 1)(mean - theta)``
    (the multi-sample form of Efron & Tibshirani 1993, section 14.3).
    """
    by_fold = pooled and FOLD in t.dims
    x = _pool_fold(t, pooled)
    xlead = tuple(d for d in x.dims if d not in (ACTUAL, PREDICTED))
    dropped = [d for d in xlead if d not in estimate.dims]
    if dropped:
        raise OptionError(
            f"method='bca' needs a statistic that keeps the leading dims {list(xlead)!r}; "
            f"{label} drops {dropped!r}; use method='percentile'"
        )
    strata = _Strata.of(x, (ACTUAL, PREDICTED))
    s, width = strata.index.shape
    k2 = strata.n_cells
    xflat = np.concatenate([x.values.reshape(s, k2), np.zeros((s, 1), np.int64)], axis=1)
    present = strata.counts > 0
    if by_fold:
        tf = t.transpose(FOLD, *xlead, ACTUAL, PREDICTED).values.reshape(t.sizes[FOLD], s, k2)
        tf = np.concatenate([tf, np.zeros((t.sizes[FOLD], s, 1), np.int64)], axis=2)
        index = np.broadcast_to(strata.index, tf.shape[:1] + strata.index.shape)
        weights = np.take_along_axis(tf, index, axis=2)
    else:
        weights = strata.counts[None]
    thetas = []
    start = 0
    for size in _blocks(width, x.size):
        rows = np.arange(start, start + size)
        block = np.repeat(xflat[None], size, axis=0)
        cols = strata.index[:, rows].T
        block[np.arange(size)[:, None], np.arange(s)[None, :], cols] -= present[:, rows].T
        block = block[..., :k2].reshape(size, *x.shape)
        jx = xr.DataArray(block, dims=("jack", *x.dims), coords=x.coords)
        thetas.append(_apply(statistic, jx, label))
        start += size
    theta = xr.concat(thetas, "jack")
    lead_shape = [x.sizes[d] for d in xlead]
    w = xr.DataArray(weights.reshape(weights.shape[0], *lead_shape, width).astype(float),
                     dims=("stratum", *xlead, "jack"),
                     coords={d: x.coords[d] for d in xlead if d in x.coords})
    n = w.sum("jack")
    safe = n.where(n > 0, 1.0)
    mean = (w * theta).sum("jack") / safe
    u = (n - 1) * (mean - theta)
    num = ((w * u**3).sum("jack") / safe**3).where(n > 0, 0.0).sum("stratum")
    den = ((w * u**2).sum("jack") / safe**2).where(n > 0, 0.0).sum("stratum")
    num, den = xr.broadcast(num, den, estimate)[:2]
    return num, den


# ----------------------------------------------------------------------------
# public bootstrap functions


def bootstrap(t, statistic=rk, *, n_resamples: int = 2000, level: float = 0.95,
              method: str = "percentile", seed=None, keep_draws: bool = False,
              pool: bool = True) -> BootstrapResult:
    r"""Bootstrap interval of any statistic of a confusion tensor.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor with whole counts, dims ``([fold,] ..., actual, predicted)``.
    statistic : callable, default :func:`foldcorr.metrics.rk`
        Tensor -> DataArray, broadcasting over leading dims (every metric of
        :mod:`foldcorr.metrics` does; so does :func:`drag`).
    n_resamples : int, default 2000
        Number of resamples (at least 100).
    level : float, default 0.95
        Confidence level, strictly between 0 and 1.
    method : {"percentile", "bca"}, default "percentile"
        Percentile interval, or bias-corrected and accelerated (BCa).
    seed : int, numpy.random.Generator or None, optional
        Seed; the same seed gives the same interval.
    keep_draws : bool, default False
        Keep the statistic of every resample in ``draws``.
    pool : bool, default True
        Apply the statistic to each resample summed over ``fold`` (pooled
        figure); ``False`` gives one interval per fold.

    Returns
    -------
    BootstrapResult

    Raises
    ------
    OptionError
        On a level outside (0, 1), fewer than 100 resamples, an unknown method,
        or a statistic that does not broadcast over leading dims.
    InvalidTensorError
        On a weighted tensor or a slice (fold) with no samples.

    Warns
    -----
    UndefinedMetricWarning
        When the statistic is undefined in some resamples (also kept in
        ``warnings``).

    Notes
    -----
    Every fold is resampled on its own, keeping its size (stratified
    bootstrap); cells are drawn as :math:`C^*_f \sim \mathrm{Multinomial}(N_f,
    C_f / N_f)`, which is exactly the distribution of resampling the fold's
    samples with replacement. The percentile interval takes the
    :math:`\alpha/2` and :math:`1-\alpha/2` quantiles of the draws. BCa [1]_
    uses the quantiles :math:`\Phi(z_0 + (z_0 + z_q)/(1 - a(z_0 + z_q)))` with
    :math:`z_0 = \Phi^{-1}(\#\{\theta^* < \hat\theta\}/B)` (ties count half,
    clipped to :math:`[1/2B, 1 - 1/2B]`) and the jackknife acceleration
    :math:`a`; deleting any one sample of a cell gives the same tensor, so the
    jackknife costs one statistic per nonzero cell.

    References
    ----------
    .. [1] B. Efron, R. J. Tibshirani, *An Introduction to the Bootstrap*,
       Chapman & Hall (1993), ch. 13-14.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[40, 10], [5, 45]], ["no", "yes"])
    >>> res = bootstrap(t, n_resamples=500, seed=7)
    >>> round(float(res.estimate), 3), float(res.low) < float(res.estimate) < float(res.high)
    (0.704, True)
    >>> from foldcorr.metrics import ovr_mcc
    >>> bootstrap(t, ovr_mcc, n_resamples=200, seed=7).low.dims
    ('class',)
    """
    return _bootstrap_many(t, {"x": (statistic, pool)}, n_resamples=n_resamples, level=level,
                           method=method, seed=seed, keep_draws=keep_draws)["x"]


def bootstrap_difference(t_a, t_b, statistic=rk, *, n_resamples: int = 2000,
                         level: float = 0.95, method: str = "percentile", seed=None,
                         keep_draws: bool = False, pool: bool = True) -> BootstrapResult:
    r"""Unpaired bootstrap interval of ``statistic(t_b) - statistic(t_a)``.

    For two evaluations on *different* samples (a new run against a stored
    baseline); for two models on the same samples use
    :func:`foldcorr.analysis.compare.compare_models`, whose paired interval is narrower.

    Parameters
    ----------
    t_a, t_b : xarray.DataArray
        Confusion tensors with whole counts and the same class coordinate.
    statistic : callable, default :func:`foldcorr.metrics.rk`
        Tensor -> DataArray, broadcasting over leading dims.
    n_resamples, level, method, seed, keep_draws, pool
        As in :func:`bootstrap`.

    Returns
    -------
    BootstrapResult
        ``estimate`` is ``statistic(t_b) - statistic(t_a)``.

    Raises
    ------
    OptionError, InvalidTensorError
        As :func:`bootstrap`.

    Notes
    -----
    Each tensor is resampled independently (stratified by fold) from one
    generator. For BCa the acceleration combines the jackknife of both
    tensors, the terms of ``t_a`` entering with a negative sign.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> a = confusion_tensor([[30, 20], [15, 35]], [0, 1])
    >>> b = confusion_tensor([[45, 5], [4, 46]], [0, 1])
    >>> res = bootstrap_difference(a, b, n_resamples=500, seed=3)
    >>> float(res.low) > 0
    True
    """
    level = check_level(level)
    n = check_resamples(n_resamples)
    check_choice("method", method, METHODS)
    ta, tb = whole_counts(t_a), whole_counts(t_b)
    ca, cb = ta.coords[ACTUAL].values, tb.coords[ACTUAL].values
    if not np.array_equal(ca, cb):
        raise InvalidTensorError(
            f"both tensors need the same classes in the same order; got {ca.tolist()!r} "
            f"and {cb.tolist()!r}"
        )
    label = _label(statistic)
    rng = np.random.default_rng(seed)
    est_a = _apply(statistic, _pool_fold(ta, pool), label)
    est_b = _apply(statistic, _pool_fold(tb, pool), label)
    estimate = (est_b - est_a).rename(est_b.name)
    jobs = {"x": (statistic, pool, label)}
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UndefinedMetricWarning)
        da = _draws(_Strata.of(ta, (ACTUAL, PREDICTED)), rng, n, jobs)["x"]
        db = _draws(_Strata.of(tb, (ACTUAL, PREDICTED)), rng, n, jobs)["x"]
        mom = None
        if method == "bca":
            na, dna = _jack_moments(ta, statistic, pool, estimate, label)
            nb, dnb = _jack_moments(tb, statistic, pool, estimate, label)
            mom = ((nb - na).transpose(*estimate.dims).values,
                   (dna + dnb).transpose(*estimate.dims).values)
    diff = db - da
    low, high, undefined = _interval(diff, estimate, level, method, mom)
    notes = _draw_notes(label, caught, undefined, estimate, n)
    for note in notes:
        warnings.warn(note, UndefinedMetricWarning, stacklevel=2)
    return BootstrapResult(
        estimate=estimate, low=_like(estimate, low, "low"), high=_like(estimate, high, "high"),
        level=level, method=method, n_resamples=n,
        draws=diff.transpose(RESAMPLE, *estimate.dims) if keep_draws else None,
        pooled=pool, warnings=notes,
    )


def drag(t, *, undefined: str = "zero") -> xr.DataArray:
    r"""Each class's drag :math:`w_k (1 - \mathrm{MCC}_k)`, as a statistic for :func:`bootstrap`.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor.
    undefined : {"zero", "nan"}, default "zero"
        Convention of :func:`foldcorr.metrics.decompose`.

    Returns
    -------
    xarray.DataArray
        Dims ``(..., "class")``, named ``drag``.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[4, 1, 0], [0, 3, 1], [1, 0, 5]], ["a", "b", "c"])
    >>> drag(t).round(4).values.tolist()
    [0.1014, 0.1014, 0.1014]
    """
    return decompose(t, undefined=undefined)["drag"]


# ----------------------------------------------------------------------------
# fold statistics


@dataclass(frozen=True)
class FoldStatistics:
    """Spread of per-fold R_K, pooled against averaged, and a corrected t interval.

    Attributes
    ----------
    per_fold : xarray.DataArray
        The statistic of every fold, dim ``fold``.
    count : int
        Number of folds J.
    mean, sd, min, max : float
        Mean, sample standard deviation (ddof = 1), minimum and maximum of the
        per-fold values. ``mean`` is the averaged figure.
    pooled : float
        The statistic of the tensor summed over folds.
    gap : float
        ``pooled - mean``.
    level : float
        Level of the interval.
    test_train_ratio : float
        n_test / n_train used in the correction.
    corrected_se : float
        :math:`\\sqrt{(1/J + n_{test}/n_{train})\\, s^2}`.
    corrected_ci : tuple of float
        ``mean -/+ t_{(1+level)/2, J-1} * corrected_se``.
    naive_ci : tuple of float
        The same with the uncorrected variance :math:`s^2 / J`, for comparison.
    warnings : tuple of str
        A note when pooled and averaged differ by more than the fold spread
        explains, or when a fold's value is undefined.
    """

    per_fold: xr.DataArray
    count: int
    mean: float
    sd: float
    min: float
    max: float
    pooled: float
    gap: float
    level: float
    test_train_ratio: float
    corrected_se: float
    corrected_ci: tuple[float, float]
    naive_ci: tuple[float, float]
    warnings: tuple[str, ...] = field(default_factory=tuple)

    @property
    def averaged(self) -> float:
        """The mean of the per-fold values (alias of ``mean``)."""
        return self.mean


def fold_statistics(t, statistic=rk, *, level: float = 0.95,
                    test_train_ratio: float | None = None) -> FoldStatistics:
    r"""Mean, spread and a Nadeau-Bengio corrected t interval of per-fold R_K.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor with a ``fold`` dim of at least two folds.
    statistic : callable, default :func:`foldcorr.metrics.rk`
        Tensor -> DataArray giving one value per fold.
    level : float, default 0.95
        Level of the t interval.
    test_train_ratio : float, optional
        n_test / n_train of one fold. Default ``1 / (J - 1)``, right for J-fold
        cross-validation where each fold is tested once and trained on the rest.

    Returns
    -------
    FoldStatistics

    Raises
    ------
    InvalidTensorError
        Without a ``fold`` dim, with fewer than two folds, or when the
        statistic does not give one value per fold.
    OptionError
        On a level outside (0, 1) or a ratio that is not positive.

    Notes
    -----
    With per-fold values :math:`r_1..r_J`, mean :math:`\bar r` and sample
    variance :math:`s^2`, the corrected variance of the mean is [1]_

    .. math:: \hat\sigma^2 = \left(\frac1J + \frac{n_{test}}{n_{train}}\right) s^2

    and the interval is :math:`\bar r \pm t_{(1+\ell)/2,\,J-1}\,\hat\sigma`.
    Training sets overlap, so fold values are positively correlated and the
    naive :math:`s^2/J` understates the variance. A warning is raised when
    :math:`|\text{pooled} - \bar r|` exceeds the naive half-width
    :math:`t_{(1+\ell)/2, J-1}\, s/\sqrt J`: pooled and averaged figures then
    differ by more than fold-to-fold noise explains (folds differ in class mix
    or in how the model behaves on them).

    References
    ----------
    .. [1] C. Nadeau, Y. Bengio, "Inference for the generalization error",
       Machine Learning 52 (2003) 239-281.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> t = tally([0, 1, 0, 1, 0, 1, 1, 0, 0, 1, 1, 0],
    ...           [0, 1, 0, 0, 0, 1, 1, 1, 0, 1, 1, 0], folds=[1, 1, 1, 1, 2, 2, 2, 2, 3, 3, 3, 3])
    >>> fs = fold_statistics(t)
    >>> fs.count, round(fs.mean, 4), fs.corrected_ci[0] < fs.mean < fs.corrected_ci[1]
    (3, 0.7182, True)
    """
    level = check_level(level)
    t = validate_tensor(t)
    if FOLD not in t.dims or t.sizes[FOLD] < 2:
        got = t.sizes.get(FOLD, 0) if FOLD in t.dims else "no fold dim"
        raise InvalidTensorError(
            f"fold statistics need a 'fold' dim with at least 2 folds; got {got!r}"
        )
    j = int(t.sizes[FOLD])
    if test_train_ratio is None:
        ratio = 1.0 / (j - 1)
    else:
        ok = isinstance(test_train_ratio, numbers.Real) and not isinstance(test_train_ratio, bool)
        if not ok or not (test_train_ratio > 0 and math.isfinite(test_train_ratio)):
            raise OptionError(
                f"`test_train_ratio` must be a positive number (n_test / n_train); "
                f"got {test_train_ratio!r}"
            )
        ratio = float(test_train_ratio)
    per_fold = statistic(t)
    if tuple(per_fold.dims) != (FOLD,):
        raise InvalidTensorError(
            f"fold statistics need one value per fold; the statistic returned dims "
            f"{per_fold.dims!r}"
        )
    pooled = float(statistic(t.sum(FOLD)))
    values = per_fold.values.astype(float)
    notes = []
    if np.isnan(values).any() or math.isnan(pooled):
        notes.append("fold statistics: a fold's value is undefined (NaN); mean, spread and "
                     "interval are not given")
    mean = float(np.mean(values))
    sd = float(np.std(values, ddof=1))
    from scipy.stats import t as student

    quantile = float(student.ppf((1 + level) / 2, j - 1))
    se = math.sqrt((1.0 / j + ratio) * sd**2)
    naive_half = quantile * sd / math.sqrt(j)
    gap = pooled - mean
    if abs(gap) > naive_half and not notes:
        notes.append(
            f"pooled R_K {pooled:.3f} and the mean of per-fold R_K {mean:.3f} differ by "
            f"{abs(gap):.3f}, more than the fold-to-fold spread explains (the {level:.0%} "
            f"t half-width is {naive_half:.3f}); the folds differ in class mix or in how the "
            "model does on them, so report both figures"
        )
    return FoldStatistics(
        per_fold=per_fold, count=j, mean=mean, sd=sd, min=float(np.min(values)),
        max=float(np.max(values)), pooled=pooled, gap=gap, level=level,
        test_train_ratio=ratio, corrected_se=se,
        corrected_ci=(mean - quantile * se, mean + quantile * se),
        naive_ci=(mean - naive_half, mean + naive_half), warnings=tuple(notes),
    )


# ----------------------------------------------------------------------------
# everything the score report shows


@dataclass(frozen=True)
class Uncertainty:
    """The intervals of one evaluation: pooled, per fold, per class, and fold statistics.

    Attributes
    ----------
    level, method, n_resamples, seed
        Settings used (``seed`` None when not fixed).
    rk : BootstrapResult
        Pooled R_K.
    fold_rk : BootstrapResult or None
        R_K of every fold (dim ``fold``), or None without folds.
    mcc, drag : BootstrapResult
        Per-class one-vs-rest MCC and drag (dim ``class``), pooled.
    folds : FoldStatistics or None
        Fold statistics, or None with fewer than two folds.
    warnings : tuple of str
        Notes from the resamples and the fold statistics.
    """

    level: float
    method: str
    n_resamples: int
    seed: int | None
    rk: BootstrapResult
    fold_rk: BootstrapResult | None
    mcc: BootstrapResult
    drag: BootstrapResult
    folds: FoldStatistics | None
    warnings: tuple[str, ...] = field(default_factory=tuple)


def summarise_uncertainty(t, *, level: float = 0.95, n_resamples: int = 2000,
                          method: str = "percentile", seed=None,
                          undefined: str = "zero",
                          test_train_ratio: float | None = None) -> Uncertainty:
    """Intervals for pooled R_K, per-fold R_K, per-class MCC and drag, on shared resamples.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor with whole counts, dims ``([fold,] actual, predicted)``.
    level, n_resamples, method, seed
        As in :func:`bootstrap`.
    undefined : {"zero", "nan"}, default "zero"
        Convention of the metrics.
    test_train_ratio : float, optional
        As in :func:`fold_statistics`.

    Returns
    -------
    Uncertainty

    Raises
    ------
    OptionError, InvalidTensorError
        As :func:`bootstrap`.

    Notes
    -----
    One set of resamples serves every figure, so the intervals are mutually
    consistent. Undefined point estimates are not repeated here (the
    evaluation reports them); undefined values among the resamples are.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> t = tally(list("aabbccaabbcc"), list("aabbcaabbbcc"), folds=[1] * 6 + [2] * 6)
    >>> u = summarise_uncertainty(t, n_resamples=200, seed=0)
    >>> u.rk.low.dims, u.mcc.low.dims, u.fold_rk.low.dims
    ((), ('class',), ('fold',))
    """
    check_choice("undefined", undefined, ("zero", "nan"))
    jobs = {
        "rk": (partial(rk, undefined=undefined), True),
        "mcc": (partial(ovr_mcc, undefined=undefined), True),
        "drag": (partial(drag, undefined=undefined), True),
    }
    t = validate_tensor(t)
    if FOLD in t.dims:
        jobs["fold_rk"] = (partial(rk, undefined=undefined), False)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        res = _bootstrap_many(t, jobs, n_resamples=n_resamples, level=level, method=method,
                              seed=seed, keep_draws=False)
        folds = None
        if FOLD in t.dims and t.sizes[FOLD] >= 2:
            folds = fold_statistics(t, partial(rk, undefined=undefined), level=level,
                                    test_train_ratio=test_train_ratio)
    notes = [w for r in res.values() for w in r.warnings]
    if folds is not None:
        notes.extend(folds.warnings)
    return Uncertainty(
        level=float(level), method=method, n_resamples=int(n_resamples),
        seed=seed if isinstance(seed, (int, np.integer)) else None,
        rk=res["rk"], fold_rk=res.get("fold_rk"), mcc=res["mcc"], drag=res["drag"],
        folds=folds, warnings=tuple(dict.fromkeys(notes)),
    )

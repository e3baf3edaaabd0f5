r"""The resampling engine: multinomial draws of the nonzero cells of a tensor.

Resampling N samples with replacement makes the cell counts of a confusion
tensor Multinomial(N, C / N). So the bootstrap here draws the nonzero cells of
the tensor directly, O(B * nnz) work instead of O(B * N), with exactly the
distribution of per-sample resampling. Each slice over the leading dims (each
fold, each label, ...) is a stratum, drawn on its own and keeping its own total;
the statistic is then applied once to a whole block of resampled tensors, since
every metric broadcasts over leading dims. Percentile and BCa intervals are read
off the draws; BCa's jackknife acceleration costs one statistic per nonzero cell.

Weighted tensors are refused, whatever their values: the cells no longer say
how many samples they hold (see :func:`whole_counts`).

Every bootstrap, paired comparison and interval of foldcorr runs through the
public names here. Nothing here reads files or prints; randomness comes from one
keyword-only ``seed``, normalised once with :func:`numpy.random.default_rng`.
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from functools import partial

import numpy as np
import xarray as xr

from foldcorr.errors import (
    MAX_RESAMPLES,
    MIN_RESAMPLES,
    InvalidTensorError,
    OptionError,
    UndefinedMetricWarning,
)
from foldcorr.tensor import ACTUAL, FOLD, PREDICTED, py_value, validate_tensor

__all__ = [
    "RESAMPLE", "METHODS", "check_level", "check_resamples",
    "whole_counts", "Strata", "resample_cells", "resample_blocks", "statistic_label", "apply_statistic",
    "pool_folds", "statistic_draws", "normal_cdf", "normal_ppf", "interval", "draw_notes",
    "jackknife_moments",
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
            at = f", e.g. {py_value(values[index])!r} at {_where(t, index)}"
        return (f"{values.dtype} counts{at}, as a weighted tally has; if these are plain "
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

    def resample(self, rng: np.random.Generator, size: int) -> xr.DataArray:
        """``size`` resampled tensors (the protocol :func:`statistic_draws` asks for)."""
        return self.dense(self.draw(rng, size))

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
    return x.sum(FOLD) if pooled and FOLD in x.dims else x


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

    ``strata`` is anything with a dense ``tensor`` and ``resample(rng, size)``
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
    for size in resample_blocks(n, max(strata.tensor.size, strata.counts.size)):
        block = strata.resample(rng, size)
        for name, (statistic, pooled, label) in jobs.items():
            values = apply_statistic(statistic, pool_folds(block, pooled), label)
            if RESAMPLE not in values.dims:
                raise OptionError(
                    f"the statistic must broadcast over leading dims; {label} dropped the "
                    f"{RESAMPLE!r} dim (returned dims {values.dims!r})"
                )
            out[name].append(values)
    return {name: xr.concat(parts, RESAMPLE) for name, parts in out.items()}


def normal_cdf(x):
    """The standard normal distribution function Phi.

    Examples
    --------
    >>> float(normal_cdf(0.0))
    0.5
    """
    from scipy.special import ndtr

    return ndtr(x)


def normal_ppf(x):
    """The standard normal quantile function, the inverse of :func:`normal_cdf`.

    Examples
    --------
    >>> round(float(normal_ppf(0.975)), 4)
    1.96
    """
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


def interval(draws: xr.DataArray, estimate: xr.DataArray, level: float, method: str,
             moments=None):
    """Percentile or BCa interval ends of draws, and where they are undefined.

    ``draws`` holds dim ``resample`` plus the dims of ``estimate``; ``method``
    is ``"percentile"`` or ``"bca"`` (see
    :func:`foldcorr.analysis.uncertainty.bootstrap`), the latter with
    ``moments = (num, den)`` of :func:`jackknife_moments` shaped like the
    estimate. Returns ``(low, high, undefined)``: numpy arrays shaped like the
    estimate, NaN (and True) where a draw or the estimate is NaN or the BCa
    level is undefined.

    Examples
    --------
    >>> import xarray as xr
    >>> draws = xr.DataArray([0.1 * i for i in range(11)], dims="resample")
    >>> low, high, bad = interval(draws, xr.DataArray(0.5), 0.8, "percentile")
    >>> round(float(low), 2), round(float(high), 2), bool(bad)
    (0.1, 0.9, False)
    """
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
        z0 = normal_ppf(np.clip(share, 0.5 / b, 1 - 0.5 / b))
        bounds = []
        for z in (normal_ppf(alpha / 2), normal_ppf(1 - alpha / 2)):
            bounds.append(normal_cdf(z0 + (z0 + z) / (1 - accel * (z0 + z))))
        q_lo, q_hi = bounds
        # a (z0 + z) at or beyond 1 leaves the adjusted level undefined
        undefined = undefined | ~np.isfinite(q_lo) | ~np.isfinite(q_hi)
        q_lo, q_hi = np.nan_to_num(q_lo, nan=0.5), np.nan_to_num(q_hi, nan=0.5)
    low = _quantile_at(d_sorted, np.asarray(q_lo, float))
    high = _quantile_at(d_sorted, np.asarray(q_hi, float))
    low = np.where(undefined, np.nan, low)
    high = np.where(undefined, np.nan, high)
    return low, high, undefined


def draw_notes(label: str, caught, undefined_mask, estimate, n) -> tuple[str, ...]:
    """Plain-language notes on undefined values met while bootstrapping ``label``.

    ``caught`` are the warnings recorded while drawing, ``undefined_mask`` the
    mask of :func:`interval` and ``n`` the number of resamples.

    Examples
    --------
    >>> import numpy as np
    >>> import xarray as xr
    >>> draw_notes("R_K", [], np.array(True), xr.DataArray(0.0), 100)
    ('bootstrap of R_K: undefined (NaN) in resamples or estimate; no interval given there',)
    """
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


def jackknife_moments(t: xr.DataArray, statistic, pooled: bool, estimate, label: str):
    """Jackknife moments (num, den) of the BCa acceleration, O(nnz) statistic evaluations.

    Deleting any one sample of a cell gives the same tensor, so the jackknife
    runs over the nonzero cells of the statistic's input, each weighted by its
    count. Each stratum (fold, when resampling is stratified) contributes
    ``sum w U^3 / n^3`` and ``sum w U^2 / n^2`` with ``U = (n - 1)(mean - theta)``
    (the multi-sample form of Efron & Tibshirani 1993, section 14.3). The
    acceleration of :func:`interval` is ``num / (6 den^1.5)``.

    Raises
    ------
    OptionError
        When the statistic drops a leading dim of its input.

    Examples
    --------
    >>> from foldcorr.metrics import rk
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[3, 1], [0, 4]], [0, 1])
    >>> num, den = jackknife_moments(t, rk, True, rk(t), "R_K")
    >>> float(den) > 0
    True
    """
    by_fold = pooled and FOLD in t.dims
    x = pool_folds(t, pooled)
    xlead = tuple(d for d in x.dims if d not in (ACTUAL, PREDICTED))
    dropped = [d for d in xlead if d not in estimate.dims]
    if dropped:
        raise OptionError(
            f"method='bca' needs a statistic that keeps the leading dims {list(xlead)!r}; "
            f"{label} drops {dropped!r}; use method='percentile'"
        )
    strata = Strata.of(x, (ACTUAL, PREDICTED))
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
    for size in resample_blocks(width, x.size):
        rows = np.arange(start, start + size)
        block = np.repeat(xflat[None], size, axis=0)
        cols = strata.index[:, rows].T
        block[np.arange(size)[:, None], np.arange(s)[None, :], cols] -= present[:, rows].T
        block = block[..., :k2].reshape(size, *x.shape)
        jx = xr.DataArray(block, dims=("jack", *x.dims), coords=x.coords)
        thetas.append(apply_statistic(statistic, jx, label))
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


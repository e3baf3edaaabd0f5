r"""Percentile and BCa intervals read off bootstrap draws, and BCa's jackknife.

The draws come from the resampling engine (:mod:`foldcorr.analysis.resampling`);
the intervals are those of Efron & Tibshirani (1993). BCa's jackknife
acceleration costs one statistic per nonzero cell, since deleting any one
sample of a cell gives the same tensor. Nothing here reads files, prints or
draws randoms.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from foldcorr.analysis.resampling import (
    RESAMPLE, Strata, apply_statistic, pool_folds, resample_blocks, where_label,
)
from foldcorr.errors import OptionError, UndefinedMetricWarning
from foldcorr.tensor import ACTUAL, FOLD, PREDICTED, nonzero_cells

__all__ = ["normal_cdf", "normal_ppf", "interval", "draw_notes", "jackknife_moments"]


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
            where = " at " + where_label(estimate, index)
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
    present = strata.counts > 0
    weights = _fold_weights(t, strata, xlead) if by_fold else strata.counts[None]
    thetas = []
    start = 0
    for size in resample_blocks(width, strata.block_cells):
        rows = np.arange(start, start + size)
        values = np.repeat(strata.counts[None], size, axis=0)
        values[np.arange(size)[:, None], np.arange(s)[None, :], rows[:, None]] -= present[:, rows].T
        block = strata.sparse_block(values) if strata.sparse else strata.dense(values)
        jx = block.rename({RESAMPLE: "jack"})
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



def _fold_weights(t: xr.DataArray, strata: Strata, xlead) -> np.ndarray:
    """Count of each stratum cell of the pooled tensor in each fold, (fold, strata, width)."""
    lead, a, p, count = nonzero_cells(t.transpose(FOLD, *xlead, ACTUAL, PREDICTED))
    k = t.sizes[ACTUAL]
    n_strata, width = strata.index.shape
    stored = (lead.astype(np.int64) * k + a) * k + p
    fold_lead = np.arange(t.sizes[FOLD])[:, None, None] * n_strata + np.arange(n_strata)[:, None]
    want = fold_lead * strata.n_cells + strata.index[None]
    pos = np.minimum(np.searchsorted(stored, want), max(len(stored) - 1, 0))
    found = (stored[pos] == want) & (strata.index < strata.n_cells)[None]
    return np.where(found, count[pos], 0)

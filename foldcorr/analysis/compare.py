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
from functools import partial

import numpy as np
import xarray as xr

from foldcorr.errors import UndefinedMetricWarning, check_choice
from foldcorr.metrics import ovr_mcc, rk
from foldcorr.tensor import ACTUAL, FOLD, JOINT_DIMS, PREDICTED, model_tensors, validate_joint
from foldcorr.analysis.resampling import (
    RESAMPLE,
    Strata,
    check_level,
    check_resamples,
    interval,
    resample_blocks,
    whole_counts,
)

__all__ = ["Comparison", "compare_models"]


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


class _Cells:
    """The nonzero joint cells of each fold, decoded to (actual, a, b) codes."""

    def __init__(self, j: xr.DataArray):
        self.k = j.sizes[ACTUAL]
        self.strata = Strata.of(j, JOINT_DIMS)
        index = np.where(self.strata.index >= self.k**3, 0, self.strata.index)
        self.actual = index // (self.k * self.k)
        self.a = (index // self.k) % self.k
        self.b = index % self.k

    def tensors(self, draws: np.ndarray, coords, lead):
        """Model tensors (resample, [fold,] actual, predicted) from joint-cell draws."""
        size, strata, _ = draws.shape
        k = self.k
        rows = (np.arange(size)[:, None, None] * strata + np.arange(strata)[None, :, None]) * k
        base = (rows + self.actual[None]) * k
        out = []
        for pred in (self.a, self.b):
            flat = np.bincount((base + pred[None]).ravel(), weights=draws.ravel(),
                               minlength=size * strata * k * k)
            shape = (size, *([strata] if lead else []), k, k)
            out.append(xr.DataArray(flat.astype(np.int64).reshape(shape),
                                    dims=(RESAMPLE, *lead, ACTUAL, PREDICTED), coords=coords))
        return out


def compare_models(joint, *, n_resamples: int = 2000, level: float = 0.95, seed=None,
                   n_permutations: int | None = None, undefined: str = "zero",
                   keep_draws: bool = False) -> Comparison:
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
        Seed of the one generator used for resamples and permutations.
    n_permutations : int, optional
        Random sign-flip permutations (at least 100); default ``n_resamples``.
    undefined : {"zero", "nan"}, default "zero"
        Convention for undefined R_K and MCC.
    keep_draws : bool, default False
        Keep the bootstrap draws of the pooled difference.

    Returns
    -------
    Comparison

    Raises
    ------
    OptionError
        On a level outside (0, 1) or fewer than 100 resamples or permutations.
    InvalidTensorError
        On a malformed joint tensor or a fold with no samples.

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
    level = check_level(level)
    n = check_resamples(n_resamples)
    n_perm = n if n_permutations is None else check_resamples(n_permutations,
                                                              name="n_permutations")
    check_choice("undefined", undefined, ("zero", "nan"))
    j = whole_counts(validate_joint(joint), what="the paired comparison")
    stat_rk = partial(rk, undefined=undefined)
    stat_mcc = partial(ovr_mcc, undefined=undefined)
    rng = np.random.default_rng(seed)
    t_a, t_b = model_tensors(j)
    notes: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UndefinedMetricWarning)
        pa, pb = (t_a.sum(FOLD), t_b.sum(FOLD)) if FOLD in t_a.dims else (t_a, t_b)
        rk_a, rk_b = float(stat_rk(pa)), float(stat_rk(pb))
        mcc_a, mcc_b = stat_mcc(pa), stat_mcc(pb)
        fold_a = stat_rk(t_a) if FOLD in t_a.dims else None
        fold_b = stat_rk(t_b) if FOLD in t_b.dims else None
    for w in caught:
        notes.append(f"comparison: {w.message}")
    difference = rk_b - rk_a
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UndefinedMetricWarning)
        d_rk, d_mcc, d_fold = _paired_draws(j, rng, n, stat_rk, stat_mcc)
        perm = _permutation_draws(j, rng, n_perm, stat_rk, t_a, t_b)
    if caught and not notes:
        notes.append("comparison: R_K or MCC undefined (0/0) in some resamples or "
                     f"permutations; they count as {'0' if undefined == 'zero' else 'NaN'}")
    tol = 1e-12 * max(1.0, abs(difference))
    p_value = (1 + int(np.sum(np.abs(perm) >= abs(difference) - tol))) / (1 + n_perm)
    est = xr.DataArray(difference)
    low, high, undefined_mask = interval(d_rk, est, level, "percentile")
    ci = (float(low), float(high))
    est_c = (mcc_b - mcc_a).rename("difference")
    low_c, high_c, _ = interval(d_mcc, est_c, level, "percentile")
    per_class = xr.Dataset({
        "mcc_a": mcc_a, "mcc_b": mcc_b, "difference": est_c,
        "low": est_c.copy(data=low_c), "high": est_c.copy(data=high_c),
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
        n=int(j.values.sum()), classes=j.coords[ACTUAL].values.tolist(), rk_a=rk_a, rk_b=rk_b,
        difference=difference, ci=ci, p_value=float(p_value), level=level, n_resamples=n,
        n_permutations=n_perm, seed=seed if isinstance(seed, (int, np.integer)) else None,
        per_class=per_class, folds=folds, draws=d_rk if keep_draws else None,
        warnings=tuple(dict.fromkeys(notes)),
    )


def _paired_draws(j, rng, n, stat_rk, stat_mcc):
    cells = _Cells(j)
    lead = [FOLD] if FOLD in j.dims else []
    coords = {d: j.coords[d] for d in lead}
    coords.update({ACTUAL: j.coords[ACTUAL].values, PREDICTED: j.coords[ACTUAL].values})
    k = cells.k
    per = cells.strata.index.shape[0] * k * k
    rks, mccs, folds = [], [], []
    for size in resample_blocks(n, per):
        ta, tb = cells.tensors(cells.strata.draw(rng, size), coords, lead)
        pa, pb = (ta.sum(FOLD), tb.sum(FOLD)) if lead else (ta, tb)
        rks.append(stat_rk(pb) - stat_rk(pa))
        mccs.append(stat_mcc(pb) - stat_mcc(pa))
        if lead:
            folds.append(stat_rk(tb) - stat_rk(ta))
    cat = partial(xr.concat, dim=RESAMPLE)
    return cat(rks), cat(mccs), (cat(folds) if folds else None)


def _permutation_draws(j, rng, n, stat_rk, t_a, t_b) -> np.ndarray:
    pooled = j.sum(FOLD) if FOLD in j.dims else j
    k = pooled.sizes[ACTUAL]
    vals = pooled.values
    i, a, b = np.nonzero(vals)
    off = a != b
    i, a, b = i[off], a[off], b[off]
    counts = vals[i, a, b]
    base_a = (t_a.sum(FOLD) if FOLD in t_a.dims else t_a).values
    base_b = (t_b.sum(FOLD) if FOLD in t_b.dims else t_b).values
    classes = pooled.coords[ACTUAL].values
    out = []
    for size in resample_blocks(n, max(k * k, counts.size)):
        swapped = rng.binomial(counts, 0.5, size=(size, counts.size))
        rows = np.arange(size)[:, None] * k * k
        into_b = (rows + i * k + b).ravel()
        into_a = (rows + i * k + a).ravel()
        w = swapped.ravel().astype(np.float64)
        delta = (np.bincount(into_b, weights=w, minlength=size * k * k)
                 - np.bincount(into_a, weights=w, minlength=size * k * k))
        delta = delta.astype(np.int64).reshape(size, k, k)
        dims = (RESAMPLE, ACTUAL, PREDICTED)
        coords = {ACTUAL: classes, PREDICTED: classes}
        ta = xr.DataArray(base_a[None] + delta, dims=dims, coords=coords)
        tb = xr.DataArray(base_b[None] - delta, dims=dims, coords=coords)
        out.append((stat_rk(tb) - stat_rk(ta)).values)
    return np.concatenate(out) if out else np.zeros(0)


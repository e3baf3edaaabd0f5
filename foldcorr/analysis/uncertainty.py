r"""The analysis layer: how sure a figure is, and whether the folds agree.

Bootstrap intervals of any statistic of a confusion tensor, of the difference
between two evaluations, and of everything the score report shows, all drawn
by the cell resampling engine of :mod:`foldcorr.analysis.resampling`
(stratified by fold, weighted tensors refused); and fold statistics, the
spread of per-fold R_K with a corrected t interval.

Nothing here reads files or prints. Randomness comes from one keyword-only
``seed``, normalised once with :func:`numpy.random.default_rng`.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from functools import partial
from typing import TYPE_CHECKING

import numpy as np
import xarray as xr

from foldcorr.analysis.clustered import (
    CLUSTER_RK, cluster_notes, cluster_strata, design_effect,
)
from foldcorr.analysis.folds import FoldStatistics, fold_statistics
from foldcorr.analysis.support import blank_thin_classes, thin_classes, thin_note
from foldcorr.analysis.intervals import draw_notes, interval, jackknife_moments
from foldcorr.analysis.resampling import (
    METHODS, RESAMPLE, Strata, apply_statistic, check_level, check_resamples, pool_folds,
    statistic_draws, statistic_label, whole_counts,
)
from foldcorr.errors import (InvalidTensorError, Recorder, UndefinedMetricWarning, check_choice,
                             places_text, undefined_places)
from foldcorr.decomposition import decompose
from foldcorr.metrics import ovr_mcc, rk
from foldcorr.tensor import ACTUAL, CLASS, FOLD, PREDICTED, validate_tensor

if TYPE_CHECKING:
    from collections.abc import Callable

    from foldcorr.tensor import ClusterCells

__all__ = [
    "BootstrapResult",
    "Uncertainty",
    "bootstrap",
    "bootstrap_difference",
    "drag",
    "summarise_uncertainty",
]


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
    n_clusters : int or None
        Clusters resampled whole (see ``cluster`` of :func:`bootstrap`), or
        None when samples were resampled one by one.
    design_effect : float or None
        With clusters: the variance of the cluster bootstrap of pooled R_K over
        that of the sample-by-sample bootstrap (1 for independent samples;
        intervals that ignore clusters are about ``sqrt(design_effect)`` too
        narrow).
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
    n_clusters: int | None = None
    design_effect: float | None = None

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

    def _repr_html_(self) -> str:
        from foldcorr.report.notebook import html_fragment  # rendering lives in the report layer

        return html_fragment(self)

    def __repr__(self) -> str:
        shape = ", ".join(f"{d}: {n}" for d, n in self.estimate.sizes.items()) or "scalar"
        head = (f"\n  {float(self.estimate):.4f} [{float(self.low):.4f}, {float(self.high):.4f}]"
                if self.estimate.ndim == 0 else "")
        return (f"BootstrapResult({shape}, {self.level:.0%} {self.method}, "
                f"{self.n_resamples} resamples){head}")


def _like(estimate: xr.DataArray, values: np.ndarray, suffix: str) -> xr.DataArray:
    name = f"{estimate.name}_{suffix}" if estimate.name else suffix
    return estimate.copy(data=np.asarray(values, dtype=float)).rename(name)


def _placed(label: str, caught) -> str:
    """A statistic's label with the classes and folds where it was undefined, if any."""
    places = places_text(undefined_places(caught))
    return f"{label} ({places})" if places else label


def _bootstrap_many(t, jobs: dict, *, n_resamples, level, method, seed, keep_draws,
                    cluster=None):
    """Bootstrap several statistics on the same resamples of ``t``.

    ``jobs`` maps a name to ``(statistic, pooled)``; returns name -> BootstrapResult.
    """
    level = check_level(level)
    n = check_resamples(n_resamples)
    check_choice("method", method, METHODS)
    t = whole_counts(t)
    rng = np.random.default_rng(seed)
    if cluster is None:
        strata, clusters = Strata.of(t, (ACTUAL, PREDICTED)), {}
    else:
        strata = cluster_strata(t, cluster, method)
        jobs = {**jobs, CLUSTER_RK: (rk, True)}
    jobs = {name: (stat, bool(pooled), statistic_label(stat)) for name, (stat, pooled) in jobs.items()}
    estimates = {name: apply_statistic(stat, pool_folds(t, pooled), label)
                 for name, (stat, pooled, label) in jobs.items()}
    # each statistic records its own undefined values: a per-class MCC's are never R_K's
    recorders = {name: Recorder(stat) for name, (stat, _, _) in jobs.items()}
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UndefinedMetricWarning)
        draws = statistic_draws(strata, rng, n, {
            name: (recorders[name], pooled, label) for name, (_, pooled, label) in jobs.items()})
        moments = {}
        if method == "bca":
            for name, (stat, pooled, label) in jobs.items():
                moments[name] = jackknife_moments(t, recorders[name], pooled, estimates[name],
                                                  label)
        if cluster is not None:
            clusters = {"n_clusters": strata.n_units, "design_effect": design_effect(
                t, draws.pop(CLUSTER_RK), rk, rng, n)}
            jobs.pop(CLUSTER_RK)
    notes = cluster_notes(strata) if cluster is not None else ()
    results = {}
    for name, (stat, pooled, label) in jobs.items():
        est = estimates[name]
        mom = moments.get(name)
        if mom is not None:
            mom = tuple(m.transpose(*est.dims).values for m in mom)
        low, high, undefined = interval(draws[name], est, level, method, mom)
        thin = thin_classes(t) if CLASS in est.dims else np.zeros(0, bool)
        results[name] = BootstrapResult(
            estimate=est, low=blank_thin_classes(_like(est, low, "low"), thin),
            high=blank_thin_classes(_like(est, high, "high"), thin),
            level=level, method=method, n_resamples=n,
            draws=draws[name].transpose(RESAMPLE, *est.dims) if keep_draws else None,
            pooled=pooled, warnings=draw_notes(_placed(label, recorders[name].caught),
                                               recorders[name].caught, undefined, est, n)
            + thin_note(t.coords[ACTUAL].values.tolist(), thin, "per-class intervals") + notes,
            **clusters,
        )
    for note in {w for r in results.values() for w in r.warnings} - set(notes):
        warnings.warn(note, UndefinedMetricWarning, stacklevel=3)
    return results


# ----------------------------------------------------------------------------
# public bootstrap functions


def bootstrap(t: xr.DataArray, statistic: Callable[..., xr.DataArray] = rk, *,
              n_resamples: int = 2000, level: float = 0.95, method: str = "percentile",
              seed: int | np.random.Generator | None = None, keep_draws: bool = False,
              pool: bool = True,
              cluster: ClusterCells | None = None) -> BootstrapResult:
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
    cluster : ClusterCells, optional
        The same samples counted by cluster
        (:func:`foldcorr.tensor.cluster_tally` with one cluster id per sample):
        whole clusters are resampled, within folds when every cluster lies in
        one fold. The result then gives ``n_clusters`` and ``design_effect``.
        Percentile intervals only.

    Returns
    -------
    BootstrapResult

    Raises
    ------
    OptionError
        On a level outside (0, 1), fewer than 100 resamples, an unknown method,
        a statistic that does not broadcast over leading dims, or BCa with
        ``cluster``.
    InvalidTensorError
        On a weighted tensor, a slice (fold) with no samples, or a ``cluster``
        that does not count the samples of ``t``.

    Warns
    -----
    UndefinedMetricWarning
        When the statistic is undefined in some resamples (also kept in
        ``warnings``), and once naming the classes whose per-class interval
        (a statistic with a ``class`` dim) is withheld as NaN because they
        have fewer than :data:`foldcorr.analysis.support.MIN_CLASS_SUPPORT`
        samples in the truth.

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

    With ``cluster``, each fold's G_f clusters are drawn G_f times with
    replacement (multiplicities Multinomial(G_f, 1/G_f)) and the tensor of a
    resample is the sum of the drawn clusters' cells
    (:mod:`foldcorr.analysis.clustered`).

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

    Clusters of samples that share their fate:

    >>> import numpy as np
    >>> from foldcorr.tensor import cluster_tally
    >>> rng = np.random.default_rng(0)
    >>> site = np.repeat(np.arange(20), 10)
    >>> truth = rng.integers(0, 2, 200)
    >>> pred = np.where(rng.random(20)[site] < 0.7, truth, 1 - truth)
    >>> c = cluster_tally(truth, pred, cluster=site)
    >>> res = bootstrap(c.tensor(), cluster=c, n_resamples=500, seed=1)
    >>> res.n_clusters, res.design_effect > 2
    (20, True)
    """
    return _bootstrap_many(t, {"x": (statistic, pool)}, n_resamples=n_resamples, level=level,
                           method=method, seed=seed, keep_draws=keep_draws,
                           cluster=cluster)["x"]


def bootstrap_difference(t_a: xr.DataArray, t_b: xr.DataArray,
                         statistic: Callable[..., xr.DataArray] = rk, *,
                         n_resamples: int = 2000, level: float = 0.95,
                         method: str = "percentile", seed: int | np.random.Generator | None = None,
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
    label = statistic_label(statistic)
    rng = np.random.default_rng(seed)
    est_a = apply_statistic(statistic, pool_folds(ta, pool), label)
    est_b = apply_statistic(statistic, pool_folds(tb, pool), label)
    estimate = (est_b - est_a).rename(est_b.name)
    jobs = {"x": (statistic, pool, label)}
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UndefinedMetricWarning)
        da = statistic_draws(Strata.of(ta, (ACTUAL, PREDICTED)), rng, n, jobs)["x"]
        db = statistic_draws(Strata.of(tb, (ACTUAL, PREDICTED)), rng, n, jobs)["x"]
        mom = None
        if method == "bca":
            na, dna = jackknife_moments(ta, statistic, pool, estimate, label)
            nb, dnb = jackknife_moments(tb, statistic, pool, estimate, label)
            mom = ((nb - na).transpose(*estimate.dims).values,
                   (dna + dnb).transpose(*estimate.dims).values)
    diff = db - da
    low, high, undefined = interval(diff, estimate, level, method, mom)
    notes = draw_notes(_placed(label, caught), caught, undefined, estimate, n)
    for note in notes:
        warnings.warn(note, UndefinedMetricWarning, stacklevel=2)
    return BootstrapResult(
        estimate=estimate, low=_like(estimate, low, "low"), high=_like(estimate, high, "high"),
        level=level, method=method, n_resamples=n,
        draws=diff.transpose(RESAMPLE, *estimate.dims) if keep_draws else None,
        pooled=pool, warnings=notes,
    )


def drag(t: xr.DataArray, *, undefined: str = "zero") -> xr.DataArray:
    r"""Each class's drag :math:`w_k (1 - \mathrm{MCC}_k)`, as a statistic for :func:`bootstrap`.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor.
    undefined : {"zero", "nan"}, default "zero"
        Convention of :func:`foldcorr.decomposition.decompose`.

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
    n_clusters, design_effect : int, float or None
        As in :class:`BootstrapResult`, with ``cluster``; None without.
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
    n_clusters: int | None = None
    design_effect: float | None = None

    def _repr_html_(self) -> str:
        from foldcorr.report.notebook import html_fragment  # rendering lives in the report layer

        return html_fragment(self)

    def __repr__(self) -> str:
        rk = self.rk
        return (f"Uncertainty({self.level:.0%} {self.method}, {self.n_resamples} resamples, "
                f"{self.mcc.estimate.sizes.get('class', 0)} classes)\n  R_K "
                f"{float(rk.estimate):.4f} [{float(rk.low):.4f}, {float(rk.high):.4f}]")


def summarise_uncertainty(t: xr.DataArray, *, level: float = 0.95, n_resamples: int = 2000,
                          method: str = "percentile",
                          seed: int | np.random.Generator | None = None,
                          undefined: str = "zero",
                          test_train_ratio: float | None = None,
                          cluster: ClusterCells | None = None) -> Uncertainty:
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
    cluster : ClusterCells, optional
        As in :func:`bootstrap`: resample whole clusters.

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
    >>> t = tally(list("aabbccaabbcc") * 3, list("aabbcaabbbcc") * 3,
    ...           folds=([1] * 6 + [2] * 6) * 3)
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
                              seed=seed, keep_draws=False, cluster=cluster)
        folds = None
        if FOLD in t.dims and t.sizes[FOLD] >= 2:
            folds = fold_statistics(t, partial(rk, undefined=undefined), level=level,
                                    test_train_ratio=test_train_ratio)
    notes = [w for r in res.values() for w in r.warnings]
    if folds is not None:
        notes.extend(folds.warnings)
    for note in set(res["mcc"].warnings) & set(res["drag"].warnings):
        warnings.warn(note, UndefinedMetricWarning, stacklevel=2)  # withheld class intervals
    return Uncertainty(
        level=float(level), method=method, n_resamples=int(n_resamples),
        seed=seed if isinstance(seed, (int, np.integer)) else None,
        rk=res["rk"], fold_rk=res.get("fold_rk"), mcc=res["mcc"], drag=res["drag"],
        folds=folds, warnings=tuple(dict.fromkeys(notes)),
        n_clusters=res["rk"].n_clusters, design_effect=res["rk"].design_effect,
    )

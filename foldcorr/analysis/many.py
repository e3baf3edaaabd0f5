r"""The analysis layer: many models scored on the same samples, ranked and compared.

A hyper-parameter search gives many candidates scored on the same folds.
:func:`compare_many` ranks them by pooled R_K with intervals, compares every
model with the best by the paired bootstrap and the sign-flip permutation test
of :mod:`foldcorr.analysis.compare` (Holm-adjusted over the comparisons), says
which models the data cannot separate from the best, which model is best for
which class, and gives per-fold R_K per model. Each comparison holds the sparse
joint cells of one pair of models (at most N of them), never a K^M array.

Nothing here reads files or prints; randomness comes from one ``seed``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import partial
from typing import TYPE_CHECKING

import numpy as np
import xarray as xr

from foldcorr.analysis.compare import PairStrata, compare_cells, paired_draws
from foldcorr.analysis.intervals import interval
from foldcorr.analysis.resampling import check_level, check_resamples
from foldcorr.analysis.support import thin_classes
from foldcorr.analysis.uncertainty import bootstrap
from foldcorr.errors import DEFAULT_SEED, InvalidInputError, check_choice
from foldcorr.metrics import ovr_mcc, rk
from foldcorr.tensor import CLASS, FOLD, cluster_tally, shared_classes

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

__all__ = ["ManyComparison", "compare_many", "holm"]

#: Name of the dim that indexes models.
MODEL = "model"


def holm(p_values: ArrayLike, *, family: int | None = None) -> np.ndarray:
    r"""Holm's step-down adjustment of p-values (family-wise error rate).

    Parameters
    ----------
    p_values : array_like
        The p-values of the tests carried out.
    family : int, optional
        Number of hypotheses in the family, at least ``len(p_values)``; the
        ones not tested count as p = 1 (never rejected). Default: the tests
        given.

    Notes
    -----
    With the m p-values of the family sorted, :math:`p_{(1)} \le \dots \le
    p_{(m)}`, the adjusted values are :math:`\max_{j \le i} \min(1, (m - j +
    1) p_{(j)})`, returned in the input order [1]_. Raising untested p-values
    to 1 can only remove rejections, so the family-wise error rate of the
    whole family still holds.

    References
    ----------
    .. [1] S. Holm, "A simple sequentially rejective multiple test procedure",
       Scand. J. Statist. 6 (1979) 65-70.

    Examples
    --------
    >>> holm([0.01, 0.04, 0.03]).tolist()
    [0.03, 0.06, 0.06]
    >>> holm([0.01, 0.04, 0.03], family=6).tolist()
    [0.06, 0.16, 0.15]
    """
    p = np.asarray(p_values, dtype=float)
    m = len(p) if family is None else max(int(family), len(p))
    order = np.argsort(p, kind="stable")
    factors = m - np.arange(len(p))
    stepped = np.minimum(1.0, np.maximum.accumulate(factors * p[order]))
    out = np.empty(len(p))
    out[order] = stepped
    return out


@dataclass(frozen=True)
class ManyComparison:
    """Many models on the same samples: ranking, comparisons with the best, class winners.

    Attributes
    ----------
    ranking : xarray.Dataset
        Dim ``model``, best first (by pooled R_K): ``rk``, ``low``, ``high``
        (bootstrap interval of each model's R_K); ``gap``, ``gap_low``,
        ``gap_high`` (R_K of the best minus R_K of the model, paired bootstrap
        interval; 0 for the best); ``p_value`` (sign-flip permutation test
        against the best), ``p_adjusted`` (Holm over all pairs of models, see
        ``adjustment``);
        ``separated`` (True when ``p_adjusted < 1 - level``); with clusters
        also ``design_effect``.
    best : str
        The model with the highest pooled R_K.
    tied : tuple of str
        The best and every model the data cannot separate from it.
    per_class : xarray.Dataset
        ``mcc`` (dims ``model, class``, one-vs-rest MCC); per class:
        ``winner``, ``runner_up``, ``margin`` (their MCC difference), ``low``,
        ``high`` (paired bootstrap interval of the margin) and ``told`` (the
        interval excludes 0: the data can tell the winner of that class).
    per_fold : xarray.DataArray or None
        R_K per model and fold (dims ``model, fold``), None without folds.
    adjustment : str
        ``"holm over all M(M-1)/2 pairs"``: the best is chosen from the same
        data, so the family is every pair of models (the pairs not compared
        count as p = 1); intervals are per comparison, at ``level``, not
        adjusted.
    level : float
        Level of every interval.
    n : int
        Number of samples.
    n_clusters : int or None
        Clusters resampled whole, or None.
    n_resamples, n_permutations : int
        Bootstrap resamples and permutations per comparison.
    seed : int or None
        Seed used (None when not fixed).
    warnings : tuple of str
        Undefined values and other notes, in plain language.
    """

    ranking: xr.Dataset
    best: str
    tied: tuple
    per_class: xr.Dataset
    per_fold: xr.DataArray | None
    adjustment: str
    level: float
    n: int
    n_clusters: int | None
    n_resamples: int
    n_permutations: int
    seed: int | None
    warnings: tuple[str, ...] = field(default_factory=tuple)

    def __repr__(self) -> str:
        models = self.ranking.sizes[MODEL]
        rk_best = float(self.ranking["rk"].sel({MODEL: self.best}))
        return (f"ManyComparison({models} models, best={self.best!r} R_K={rk_best:.4f}, "
                f"not separated from it: {list(self.tied[1:])!r}, p adjusted: "
                f"{self.adjustment})")

    def plot(self, kind: str = "models", ax=None, **options):
        """Draw one plot of this result with matplotlib (the ``plot`` extra).

        Parameters
        ----------
        kind : str, default "models"
            A plot of ``foldcorr.report.plots.PLOTS["ManyComparison"]``.
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
        >>> r = compare_many(list("aabbccaabbcc"), {"x": list("aabbccaabbca"),
        ...                  "y": list("abbbccaabcca")}, n_resamples=200, seed=1)
        >>> r.plot().axes[0].get_xlabel()
        'R_K (pooled over folds)'
        """
        from foldcorr.report.plots import plot  # drawing lives in the report layer

        return plot(self, kind, ax=ax, **options)

    def _repr_html_(self) -> str:
        from foldcorr.report.notebook import html_fragment  # rendering lives in the report layer

        return html_fragment(self)


def compare_many(truth: ArrayLike, predictions: Mapping[str, ArrayLike], *,
                 folds: ArrayLike | None = None, cluster: ArrayLike | None = None,
                 level: float = 0.95, n_resamples: int = 2000,
                 n_permutations: int | None = None,
                 seed: int | np.random.Generator | None = DEFAULT_SEED,
                 undefined: str = "zero") -> ManyComparison:
    r"""Rank many models by R_K and compare each with the best, on the same samples.

    Parameters
    ----------
    truth : array_like
        One actual label per sample.
    predictions : mapping of str to array_like
        Model name -> one predicted label per sample (at least two models).
    folds : array_like, optional
        One fold label per sample; resampling is stratified by fold.
    cluster : array_like, optional
        One cluster id per sample: resample (and swap) whole clusters.
    level : float, default 0.95
        Level of the intervals and of the decisions (alpha = 1 - level).
    n_resamples : int, default 2000
        Bootstrap resamples per interval (at least 100).
    n_permutations : int, optional
        Sign-flip permutations per comparison; default ``n_resamples``.
    seed : int, numpy.random.Generator or None, optional
        Seed of the one generator used throughout (default
        :data:`foldcorr.errors.DEFAULT_SEED`).
    undefined : {"zero", "nan"}, default "zero"
        Convention for undefined R_K and MCC.

    Returns
    -------
    ManyComparison

    Raises
    ------
    InvalidInputError
        With fewer than two models, or arrays of different lengths.
    OptionError
        On a bad level, number of resamples or permutations.

    Notes
    -----
    Each model m other than the best b is compared with it as
    :func:`foldcorr.analysis.compare.compare_models` compares A = m with B = b,
    on the joint cells of that pair only: the gap :math:`R_K^b - R_K^m`, its
    paired percentile interval, and the two-sided sign-flip p-value, whose
    null is that the two predictions of each sample (each cluster, with
    ``cluster``) are exchangeable. The M - 1 p-values are adjusted by Holm's
    method [1]_ over the family of all M(M - 1)/2 pairs of models (the pairs
    not compared count as p = 1): the best is chosen from the same data, and
    adjusting over the M - 1 comparisons with it alone let the family-wise
    error reach about twice 1 - level in simulation (``docs/uncertainty.md``).
    A model is *separated* from the best when its adjusted p-value is below
    1 - level. With two models the numbers equal those of
    ``compare_models(joint_tally(truth, other, best, folds=folds), seed=seed)``.

    A class's winner is the model with the highest one-vs-rest MCC; the data
    *tell* it when the paired interval of its margin over the runner-up
    excludes 0 (per class, not adjusted over classes). Classes too thin for
    an interval (:func:`foldcorr.analysis.support.thin_classes`) get none
    and are never told.

    References
    ----------
    .. [1] S. Holm, "A simple sequentially rejective multiple test procedure",
       Scand. J. Statist. 6 (1979) 65-70.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> truth = rng.integers(0, 3, 300)
    >>> noisy = lambda p: np.where(rng.random(300) < p, truth, rng.integers(0, 3, 300))
    >>> res = compare_many(truth, {"a": noisy(0.5), "b": noisy(0.9), "c": noisy(0.88)},
    ...                    n_resamples=300, seed=1)
    >>> res.best, res.ranking["model"].values.tolist()
    ('c', ['c', 'b', 'a'])
    >>> bool(res.ranking["separated"].sel(model="a")), res.tied
    (True, ('c', 'b'))
    """
    level = check_level(level)
    n = check_resamples(n_resamples)
    n_perm = n if n_permutations is None else check_resamples(n_permutations,
                                                              name="n_permutations")
    check_choice("undefined", undefined, ("zero", "nan"))
    names, preds = _models(truth, predictions)
    rng = np.random.default_rng(seed)
    classes = shared_classes(truth, *preds)
    units = np.arange(len(preds[0])) if cluster is None else cluster
    tally_of = partial(cluster_tally, cluster=units, folds=folds, classes=classes)
    singles = {m: tally_of(truth, p) for m, p in zip(names, preds)}
    stat_rk = partial(rk, undefined=undefined)
    rks = {m: float(stat_rk(c.tensor().sum(FOLD) if folds is not None else c.tensor()))
           for m, c in singles.items()}
    order = sorted(names, key=lambda m: -rks[m])
    best = order[0]
    options = dict(clustered=cluster is not None, n_resamples=n, level=level,
                   n_permutations=n_perm, undefined=undefined, rng=rng)
    pairs = {m: compare_cells(tally_of(truth, predictions[m], predictions[best]), **options)
             for m in order[1:]}
    ranking = _ranking(order, rks, pairs, singles, cluster is not None, rng, n, level,
                       undefined)
    tied = tuple(m for m in order if not bool(ranking["separated"].sel({MODEL: m})))
    per_class = _class_winners(truth, predictions, singles, tally_of, options, undefined)
    per_fold = None
    if folds is not None:
        per_fold = xr.concat([stat_rk(singles[m].tensor()) for m in order],
                             dim=xr.DataArray(order, dims=MODEL, name=MODEL))
    notes = [w for c in pairs.values() for w in c.warnings]
    family = len(order) * (len(order) - 1) // 2
    if family / (1 + n_perm) >= 1 - level:
        notes.append(
            f"with {n_perm} permutations the smallest Holm-adjusted p-value over the {family} "
            f"pairs is {family / (1 + n_perm):.3g}, not below {1 - level:.3g}: no model can be "
            f"separated from the best; use n_permutations >= {math.ceil(family / (1 - level))}")
    return ManyComparison(
        ranking=ranking, best=best, tied=tied, per_class=per_class, per_fold=per_fold,
        adjustment="holm over all M(M-1)/2 pairs", level=level, n=len(preds[0]),
        n_clusters=None if cluster is None else singles[best].n_clusters,
        n_resamples=n, n_permutations=n_perm,
        seed=seed if isinstance(seed, (int, np.integer)) else None,
        warnings=tuple(dict.fromkeys(notes)),
    )


def _models(truth, predictions):
    if not isinstance(predictions, Mapping) or len(predictions) < 2:
        raise InvalidInputError(
            "`predictions` must map at least two model names to their predicted labels; "
            f"got {predictions!r:.80}")
    names = list(predictions)
    preds = [np.asarray(predictions[m]) for m in names]
    n = len(np.asarray(truth))
    for m, p in zip(names, preds):
        if len(p) != n:
            raise InvalidInputError(
                f"predictions of model {m!r} have {len(p)} values but there are {n} truth labels")
    return names, preds


def _ranking(order, rks, pairs, singles, clustered, rng, n, level, undefined) -> xr.Dataset:
    """Dim ``model``, best first: R_K with its interval, gap to the best, p-values."""
    stat_rk = partial(rk, undefined=undefined)
    boots = [bootstrap(singles[m].tensor(), stat_rk, n_resamples=n, level=level, seed=rng,
                       cluster=singles[m] if clustered else None) for m in order]
    gap = [0.0] + [pairs[m].difference for m in order[1:]]
    gap_low = [0.0] + [pairs[m].ci[0] for m in order[1:]]
    gap_high = [0.0] + [pairs[m].ci[1] for m in order[1:]]
    p = np.array([pairs[m].p_value for m in order[1:]])
    m = len(order)
    adjusted = np.concatenate([[1.0], holm(p, family=m * (m - 1) // 2)])
    data = {
        "rk": [rks[m] for m in order], "low": [float(b.low) for b in boots],
        "high": [float(b.high) for b in boots], "gap": gap, "gap_low": gap_low,
        "gap_high": gap_high, "p_value": np.concatenate([[1.0], p]),
        "p_adjusted": adjusted, "separated": adjusted < 1 - level,
    }
    if clustered:
        data["design_effect"] = [b.design_effect for b in boots]
    return xr.Dataset({k: (MODEL, np.asarray(v)) for k, v in data.items()},
                      coords={MODEL: order})


def _class_winners(truth, predictions, singles, tally_of, options, undefined) -> xr.Dataset:
    """One-vs-rest MCC of every model, and each class's winner against its runner-up."""
    names = list(singles)
    stat_mcc = partial(ovr_mcc, undefined=undefined)
    pooled = [c.tensor().sum(FOLD) if c.folds is not None else c.tensor()
              for c in singles.values()]
    mcc = xr.concat([stat_mcc(t) for t in pooled], dim=xr.DataArray(names, dims=MODEL))
    values = mcc.values
    ranks = np.argsort(-values, axis=0, kind="stable")
    winner, runner = ranks[0], ranks[1]
    k = values.shape[1]
    low, high = np.full(k, np.nan), np.full(k, np.nan)
    for w, r in sorted(set(zip(winner.tolist(), runner.tolist()))):
        cells = tally_of(truth, predictions[names[r]], predictions[names[w]])
        pair = PairStrata.of(cells, clustered=options["clustered"])
        draws = paired_draws(pair, options["rng"], options["n_resamples"],
                             partial(rk, undefined=undefined), stat_mcc)[1]
        est = xr.DataArray(values[w] - values[r], dims=CLASS)
        lo, hi, _ = interval(draws, est, options["level"], "percentile")
        t_r, t_w = (p.sum(FOLD) if FOLD in p.dims else p for p in pair.observed())
        thin = thin_classes(t_r) & thin_classes(t_w)
        lo, hi = np.where(thin, np.nan, lo), np.where(thin, np.nan, hi)
        mine = (winner == w) & (runner == r)
        low[mine], high[mine] = lo[mine], hi[mine]
    margin = values[winner, np.arange(k)] - values[runner, np.arange(k)]
    return xr.Dataset({
        "mcc": mcc, "winner": (CLASS, np.asarray(names, dtype=object)[winner]),
        "runner_up": (CLASS, np.asarray(names, dtype=object)[runner]),
        "margin": (CLASS, margin), "low": (CLASS, low), "high": (CLASS, high),
        "told": (CLASS, (low > 0) | (high < 0)),  # NaN (withheld) never tells
    }, coords={CLASS: mcc.coords[CLASS].values})

"""Coverage and error-rate simulations (slow; run with ``python -m pytest -m slow -s``).

Each test draws data sets from a known population, computes intervals or p-values with
foldcorr, and checks how often they cover the population value (or reject a true null).
Tolerances are about 3 Monte Carlo standard errors around the claimed rate. Figures from
longer runs of the same designs are in docs/uncertainty.md.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy import stats

import foldcorr as fc
from foldcorr.tensor import cluster_tally, confusion_tensor, tally

pytestmark = pytest.mark.slow


def _se(p, n):
    return math.sqrt(p * (1 - p) / n)


def _population(k, prevalence, accuracy):
    """Joint probabilities of (actual, predicted): class 0 at ``prevalence``, errors uniform."""
    pi = np.full(k, (1 - prevalence) / (k - 1))
    pi[0] = prevalence
    cond = np.full((k, k), (1 - accuracy) / (k - 1))
    np.fill_diagonal(cond, accuracy)
    return pi[:, None] * cond


def _ovr_truth(p):
    t, q = p.sum(1), p.sum(0)
    return (np.diag(p) - t * q) / np.sqrt(t * (1 - t) * q * (1 - q))


def _class_coverage(n, prevalence, accuracy, reps, seed):
    k = 10
    p = _population(k, prevalence, accuracy)
    truth = _ovr_truth(p)
    rng = np.random.default_rng(seed)
    covered, shown = np.zeros(k), np.zeros(k)
    for _ in range(reps):
        cells = rng.multinomial(n, p.ravel()).reshape(k, k)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            res = fc.bootstrap(confusion_tensor(cells, list(range(k))), fc.ovr_mcc,
                               n_resamples=1000, seed=rng)
        lo, hi = res.low.values, res.high.values
        ok = np.isfinite(lo)
        shown += ok
        covered += ok & (lo <= truth) & (truth <= hi)
    return covered, shown


@pytest.mark.parametrize("n, accuracy", [(300, 0.8), (1000, 0.5), (1000, 0.8)])
def test_per_class_intervals_cover_where_shown_rare_class_included(n, accuracy):
    covered, shown = _class_coverage(n, 0.01, accuracy, reps=400, seed=n)
    rare = covered[0] / shown[0]
    common = covered[1:].sum() / shown[1:].sum()
    print(f"\nN={n} 1% class: shown {shown[0] / 400:.2f}, coverage {rare:.3f} "
          f"± {_se(rare, shown[0]):.3f}; other classes {common:.3f}")
    assert 0.93 - 3 * _se(0.95, shown[0]) <= rare <= 0.985 + 3 * _se(0.95, shown[0])
    assert abs(common - 0.95) < 3 * _se(0.95, shown[1:].sum()) + 0.01


def _clustered_sample(rng, n_clusters, size, k=3):
    """Clusters of ``size`` sharing their fate: a cluster is predicted well (0.9) or badly (0.4)."""
    cluster = np.repeat(np.arange(n_clusters), size)
    truth = rng.integers(0, k, cluster.size)
    acc = np.where(rng.random(n_clusters) < 0.5, 0.9, 0.4)[cluster]
    wrong = (truth + rng.integers(1, k, cluster.size)) % k
    return truth, np.where(rng.random(cluster.size) < acc, truth, wrong), cluster


def test_cluster_intervals_cover_where_sample_intervals_do_not():
    # population: mean accuracy 0.65, errors uniform over the other two classes
    a = 0.65
    p = np.full((3, 3), (1 - a) / 6)
    np.fill_diagonal(p, a / 3)
    true_rk = float(fc.rk(confusion_tensor(p, [0, 1, 2])))
    rng = np.random.default_rng(20)
    reps, hits_iid, hits_cluster = 200, 0, 0
    for _ in range(reps):
        truth, pred, cluster = _clustered_sample(rng, 30, 20)
        c = cluster_tally(truth, pred, cluster=cluster)
        t = c.tensor()
        iid = fc.bootstrap(t, n_resamples=500, seed=rng)
        clu = fc.bootstrap(t, cluster=c, n_resamples=500, seed=rng)
        hits_iid += float(iid.low) <= true_rk <= float(iid.high)
        hits_cluster += float(clu.low) <= true_rk <= float(clu.high)
    cov_iid, cov_cluster = hits_iid / reps, hits_cluster / reps
    print(f"\nclusters of 20: sample bootstrap {cov_iid:.3f}, cluster bootstrap {cov_cluster:.3f} "
          f"(± {_se(0.95, reps):.3f})")
    assert cov_iid < 0.8
    assert abs(cov_cluster - 0.95) < 3 * _se(0.95, reps) + 0.02


def test_pairwise_null_p_values_are_uniform():
    rng = np.random.default_rng(30)
    p = []
    for _ in range(200):
        truth = rng.integers(0, 3, 300)
        preds = {m: np.where(rng.random(300) < 0.6, truth, rng.integers(0, 3, 300))
                 for m in ("a", "b")}
        res = fc.compare_many(truth, preds, n_resamples=100, n_permutations=199, seed=rng)
        p.append(float(res.ranking["p_value"].values[1]))
    print(f"\ntwo exchangeable models: KS p = {stats.kstest(p, 'uniform').pvalue:.3f}, "
          f"rejections at 0.05: {np.mean(np.array(p) < 0.05):.3f}")
    assert stats.kstest(p, "uniform").pvalue > 0.01


def test_many_model_type_one_error_after_adjustment():
    rng = np.random.default_rng(31)
    reps, any_separated = 150, 0
    for _ in range(reps):
        truth = rng.integers(0, 3, 300)
        preds = {f"m{i}": np.where(rng.random(300) < 0.6, truth, rng.integers(0, 3, 300))
                 for i in range(5)}
        res = fc.compare_many(truth, preds, n_resamples=100, n_permutations=999, seed=rng)
        any_separated += bool(res.ranking["separated"].any())
    rate = any_separated / reps
    print(f"\nfive exchangeable models: family-wise error {rate:.3f} ± {_se(rate, reps):.3f}")
    assert rate < 0.05 + 3 * _se(0.05, reps)


def test_fold_interval_coverage_naive_and_corrected():
    # nearest-centroid learner on three Gaussian classes; target: expected population R_K
    # of the learner trained on 4/5 of N samples
    means = np.array([[0, 0], [1.2, 0], [0.6, 1.0]])
    prior = np.array([0.5, 0.3, 0.2])
    rng = np.random.default_rng(40)

    def sample(n):
        y = rng.choice(3, n, p=prior)
        return means[y] + rng.normal(size=(n, 2)), y

    def fit(x, y):
        return np.array([x[y == k].mean(0) for k in range(3)])

    def predict(c, x):
        return np.argmin(((x[:, None, :] - c[None]) ** 2).sum(-1), 1)

    xt, yt = sample(60_000)

    def population_rk(c):
        return float(fc.rk(tally(yt, predict(c, xt), classes=range(3))))

    n, j = 300, 5
    target = np.mean([population_rk(fit(*sample(n * (j - 1) // j))) for _ in range(200)])
    reps, naive, corrected = 300, 0, 0
    for _ in range(reps):
        x, y = sample(n)
        folds = rng.permutation(np.arange(n) % j)
        pred = np.empty(n, int)
        for f in range(j):
            train = folds != f
            pred[~train] = predict(fit(x[train], y[train]), x[~train])
        fs = fc.fold_statistics(tally(y, pred, folds=folds, classes=range(3)))
        naive += fs.naive_ci[0] <= target <= fs.naive_ci[1]
        corrected += fs.corrected_ci[0] <= target <= fs.corrected_ci[1]
    print(f"\n5-fold: naive {naive / reps:.3f}, corrected {corrected / reps:.3f} "
          f"(± {_se(0.95, reps):.3f})")
    assert abs(naive / reps - 0.95) < 3 * _se(0.95, reps) + 0.01
    assert corrected / reps > 0.95

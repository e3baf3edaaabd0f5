"""Clustered resampling: whole clusters drawn from sparse cells."""

import numpy as np
import pytest
from sklearn.metrics import matthews_corrcoef

import foldcorr as fc
from foldcorr.analysis.clustered import ClusterStrata
from foldcorr.errors import InvalidTensorError, OptionError
from foldcorr.tensor import cluster_tally, tally
from foldcorr.testing import assert_tensor_equal


def _clustered_data(n_clusters=40, size=10, seed=0, k=3):
    """Clusters sharing their fate: each cluster is predicted well or badly as a whole."""
    rng = np.random.default_rng(seed)
    cluster = np.repeat(np.arange(n_clusters), size)
    truth = rng.integers(0, k, cluster.size)
    good = rng.random(n_clusters)[cluster] < 0.6
    noise = rng.integers(0, k, cluster.size)
    pred = np.where(good | (rng.random(cluster.size) < 0.3), truth, noise)
    return truth, pred, cluster


def test_cluster_tally_counts_what_tally_counts():
    truth, pred, cluster = _clustered_data()
    folds = cluster % 5
    c = cluster_tally(truth.astype(str), pred.astype(str), cluster=cluster, folds=folds)
    dense = tally(truth.astype(str), pred.astype(str), folds=folds)
    assert_tensor_equal(c.tensor(), dense)
    assert c.classes == dense.coords["actual"].values.tolist()
    assert len(c.count) <= truth.size and c.n_clusters == 40


def test_clusters_of_one_sample_give_the_iid_interval():
    rng = np.random.default_rng(3)
    truth = rng.integers(0, 4, 600)
    pred = np.where(rng.random(600) < 0.6, truth, rng.integers(0, 4, 600))
    folds = np.arange(600) % 3
    t = tally(truth, pred, folds=folds)
    c = cluster_tally(truth, pred, cluster=np.arange(600), folds=folds)
    iid = fc.bootstrap(t, n_resamples=4000, seed=1)
    clu = fc.bootstrap(t, cluster=c, n_resamples=4000, seed=2)
    # Monte Carlo error of a 2.5% quantile with B = 4000 is about 0.004 here
    assert abs(float(clu.low) - float(iid.low)) < 0.012
    assert abs(float(clu.high) - float(iid.high)) < 0.012
    assert clu.n_clusters == 600 and 0.85 < clu.design_effect < 1.15
    assert iid.n_clusters is None and iid.design_effect is None


def test_cluster_bootstrap_matches_a_per_cluster_loop_scored_with_sklearn():
    # Reference: resample cluster ids with replacement, gather their samples and score
    # with sklearn.metrics.matthews_corrcoef (the reference library).
    truth, pred, cluster = _clustered_data(n_clusters=30, size=8, seed=5)
    c = cluster_tally(truth, pred, cluster=cluster)
    res = fc.bootstrap(c.tensor(), cluster=c, n_resamples=3000, seed=0, keep_draws=True)
    rng = np.random.default_rng(9)
    members = [np.flatnonzero(cluster == g) for g in range(30)]
    ref = []
    for _ in range(300):
        rows = np.concatenate([members[g] for g in rng.integers(0, 30, 30)])
        ref.append(matthews_corrcoef(truth[rows], pred[rows]))
    ref = np.array(ref)
    ours = res.draws.values
    sd = ref.std()
    # means within 4 standard errors, spreads within 15% (sd of a sd ~ 4% at B = 300)
    assert abs(ours.mean() - ref.mean()) < 4 * sd * np.sqrt(1 / 3000 + 1 / 300)
    assert abs(ours.std() / sd - 1) < 0.15
    assert abs(float(res.estimate) - matthews_corrcoef(truth, pred)) < 1e-12


def test_clusters_widen_the_interval_by_the_design_effect():
    truth, pred, cluster = _clustered_data(n_clusters=40, size=20, seed=1)
    c = cluster_tally(truth, pred, cluster=cluster)
    t = c.tensor()
    iid = fc.bootstrap(t, n_resamples=2000, seed=0)
    clu = fc.bootstrap(t, cluster=c, n_resamples=2000, seed=0)
    ratio = (float(clu.high) - float(clu.low)) / (float(iid.high) - float(iid.low))
    assert clu.design_effect > 3
    assert abs(ratio / np.sqrt(clu.design_effect) - 1) < 0.15


def test_within_folds_each_fold_keeps_its_number_of_clusters():
    truth, pred, cluster = _clustered_data(n_clusters=20, size=5, seed=2)
    folds = cluster % 4
    c = cluster_tally(truth, pred, cluster=cluster, folds=folds)
    s = ClusterStrata.of(c)
    assert not s.across_folds and len(s.strata) == 4
    block = s.resample(np.random.default_rng(0), 50)
    assert (block.sum(("actual", "predicted")).values == 25).all()


def test_clusters_that_span_folds_are_drawn_whole_with_a_note():
    truth, pred, cluster = _clustered_data(n_clusters=20, size=6, seed=2)
    folds = np.arange(truth.size) % 3
    c = cluster_tally(truth, pred, cluster=cluster, folds=folds)
    res = fc.bootstrap(c.tensor(), cluster=c, n_resamples=200, seed=0)
    assert any("span folds" in w for w in res.warnings)
    assert ClusterStrata.of(c).across_folds


def test_summarise_uncertainty_takes_clusters():
    truth, pred, cluster = _clustered_data(n_clusters=30, size=10, seed=4)
    folds = cluster % 3
    c = cluster_tally(truth, pred, cluster=cluster, folds=folds)
    u = fc.summarise_uncertainty(c.tensor(), cluster=c, n_resamples=300, seed=0)
    assert u.n_clusters == 30 and u.design_effect > 1.5
    assert u.mcc.low.dims == ("class",) and u.fold_rk.low.dims == ("fold",)


def test_cluster_refusals():
    truth, pred, cluster = _clustered_data(n_clusters=10, size=4)
    c = cluster_tally(truth, pred, cluster=cluster)
    with pytest.raises(OptionError, match="only method='percentile'"):
        fc.bootstrap(c.tensor(), cluster=c, method="bca")
    with pytest.raises(InvalidTensorError, match="must count the same samples"):
        fc.bootstrap(tally(truth, truth), cluster=c)
    with pytest.raises(InvalidTensorError, match="cells by cluster"):
        fc.bootstrap(c.tensor(), cluster=cluster)
    with pytest.raises(fc.InvalidInputError, match="`cluster` has 3 values"):
        cluster_tally(truth, pred, cluster=[1, 2, 3])


def test_compare_models_resamples_and_swaps_whole_clusters():
    rng = np.random.default_rng(11)
    cluster = np.repeat(np.arange(40), 10)
    truth = rng.integers(0, 3, 400)
    # both models succeed or fail together on a cluster (shared fate), B a little better
    hard = rng.random(40)[cluster] < 0.4
    a = np.where(~hard & (rng.random(400) < 0.8), truth, (truth + 1) % 3)
    b = np.where(~hard & (rng.random(400) < 0.85), truth, (truth + 1) % 3)
    j = fc.joint_tally(truth, a, b)
    cells = cluster_tally(truth, a, b, cluster=cluster)
    iid = fc.compare_models(j, n_resamples=500, seed=0)
    clu = fc.compare_models(j, cluster=cells, n_resamples=500, seed=0)
    assert clu.difference == iid.difference
    assert clu.n_clusters == 40 and iid.n_clusters is None
    assert np.isfinite(clu.design_effect) and clu.design_effect > 0
    singles = cluster_tally(truth, a, b, cluster=np.arange(400))
    one = fc.compare_models(j, cluster=singles, n_resamples=2000, seed=1)
    ref = fc.compare_models(j, n_resamples=2000, seed=2)
    assert abs(one.ci[0] - ref.ci[0]) < 0.015 and abs(one.ci[1] - ref.ci[1]) < 0.015
    assert 0.8 < one.design_effect < 1.25
    with pytest.raises(InvalidTensorError, match="class dims"):
        fc.compare_models(j, cluster=cluster_tally(truth, a, cluster=cluster))

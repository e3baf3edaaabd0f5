"""Tests of foldcorr.analysis.compare (joint tensor, paired bootstrap, permutation test).

References: pandas.crosstab and sklearn.metrics.confusion_matrix for counts,
sklearn.metrics.matthews_corrcoef for R_K and one-vs-rest MCC, a per-sample
paired bootstrap for the interval, exact enumeration of all 2^n swaps for the
permutation distribution, and scipy.stats.kstest for uniform null p-values.
Monte Carlo tolerances as in test_uncertainty.py.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from sklearn.metrics import confusion_matrix, matthews_corrcoef

import foldcorr as fc
from foldcorr.analysis.compare import PairStrata, permutation_draws
from foldcorr.analysis.clustered import dense_cells
from foldcorr.tensor import model_tensors, validate_joint
from foldcorr.errors import InvalidInputError, InvalidTensorError, OptionError
from foldcorr.tensor import tally


def _models(rng, n, k, acc_a, acc_b):
    truth = rng.integers(0, k, n)
    a = np.where(rng.random(n) < acc_a, truth, rng.integers(0, k, n))
    b = np.where(rng.random(n) < acc_b, truth, rng.integers(0, k, n))
    return truth, a, b


def test_joint_tally_matches_pandas_crosstab_and_margins_match_sklearn():
    rng = np.random.default_rng(0)
    truth, a, b = _models(rng, 500, 4, 0.6, 0.7)
    j = fc.joint_tally(truth, a, b)
    assert j.dims == ("actual", "predicted_a", "predicted_b")
    ref = pd.crosstab(truth, [a, b])  # pandas, outside the project
    for (pa, pb), column in ref.items():
        np.testing.assert_array_equal(j.sel(predicted_a=pa, predicted_b=pb).values, column.values)
    t_a, t_b = model_tensors(j)
    np.testing.assert_array_equal(t_a.values, confusion_matrix(truth, a))  # sklearn
    np.testing.assert_array_equal(t_b.values, confusion_matrix(truth, b))


def test_joint_tally_with_folds_strings_and_fixed_classes():
    j = fc.joint_tally(["x", "y", "y", "x"], ["x", "y", "x", "x"], ["y", "y", "y", "x"],
                       folds=[2, 2, 1, 1], classes=["y", "x", "z"])
    assert j.dims == ("fold", "actual", "predicted_a", "predicted_b")
    assert j.coords["predicted_b"].values.tolist() == ["y", "x", "z"]
    assert int(j.sel(fold=1, actual="y", predicted_a="x", predicted_b="y")) == 1
    assert int(j.sum()) == 4


def test_joint_tally_bad_input_names_the_column():
    with pytest.raises(InvalidInputError, match=r"`pred_b` has 2 values but there are 3 truth labels"):
        fc.joint_tally([1, 2, 3], [1, 2, 3], [1, 2])
    with pytest.raises(InvalidInputError, match=r"column 'pred_b' row 2: missing label"):
        fc.joint_tally(["a", "b"], ["a", "b"], ["a", None])
    with pytest.raises(InvalidInputError, match=r"column 'pred_a' row 1: label 'q' is not among the classes"):
        fc.joint_tally(["a", "b"], ["q", "b"], ["a", "b"], classes=["a", "b"])


def test_validate_joint_refuses_malformed_tensors():
    j = fc.joint_tally([0, 1], [0, 1], [1, 1])
    with pytest.raises(InvalidTensorError, match=r"a joint tensor has dims"):
        validate_joint(j.rename(predicted_b="other"))
    with pytest.raises(InvalidTensorError, match=r"class coordinates of 'actual' and 'predicted_b' differ"):
        validate_joint(j.assign_coords(predicted_b=[5, 6]))
    with pytest.raises(InvalidTensorError, match=r"joint counts must be non-negative"):
        validate_joint(-j)
    assert validate_joint(j * 0.5).dtype == np.float64  # sums of weights are a joint tensor
    with pytest.raises(InvalidTensorError, match=r"needs whole counts"):
        fc.compare_models(j * 0.5)


def test_figures_match_sklearn_per_model_per_class_and_per_fold():
    rng = np.random.default_rng(1)
    truth, a, b = _models(rng, 600, 3, 0.6, 0.75)
    folds = np.arange(600) % 3
    c = fc.compare_models(fc.joint_tally(truth, a, b, folds=folds), n_resamples=200, seed=0)
    assert c.rk_a == pytest.approx(matthews_corrcoef(truth, a), abs=1e-12)
    assert c.rk_b == pytest.approx(matthews_corrcoef(truth, b), abs=1e-12)
    for k in range(3):
        row = c.per_class.sel({"class": k})
        assert float(row.mcc_a) == pytest.approx(matthews_corrcoef(truth == k, a == k), abs=1e-12)
        assert float(row.difference) == pytest.approx(
            matthews_corrcoef(truth == k, b == k) - matthews_corrcoef(truth == k, a == k), abs=1e-12)
    for f in range(3):
        m = folds == f
        assert float(c.folds.difference.sel(fold=f)) == pytest.approx(
            matthews_corrcoef(truth[m], b[m]) - matthews_corrcoef(truth[m], a[m]), abs=1e-12)


def test_paired_interval_matches_per_sample_paired_resampling():
    # reference: one set of indices per resample for both models, sklearn MCC
    rng = np.random.default_rng(2)
    truth, a, b = _models(rng, 200, 3, 0.6, 0.7)
    c = fc.compare_models(fc.joint_tally(truth, a, b), n_resamples=4000, seed=3,
                          n_permutations=100, keep_draws=True)
    ref_rng = np.random.default_rng(4)
    ref = []
    for _ in range(800):
        i = ref_rng.integers(0, 200, 200)
        ref.append(matthews_corrcoef(truth[i], b[i]) - matthews_corrcoef(truth[i], a[i]))
    low, high = np.quantile(ref, [0.025, 0.975])
    sigma = float(c.draws.std())
    tol = 4 * 2.67 * sigma * math.sqrt(1 / 4000 + 1 / 800)
    assert abs(c.ci[0] - low) < tol and abs(c.ci[1] - high) < tol


def test_pairing_narrows_the_interval_for_related_models():
    # B is A with a tenth of its errors fixed: the two R_K move together over
    # resamples, so the paired interval is far narrower than the unpaired one
    # (variance of a difference of positively correlated estimates; common practice)
    rng = np.random.default_rng(5)
    truth, a, _ = _models(rng, 400, 3, 0.6, 0.6)
    b = np.where(rng.random(400) < 0.1, truth, a)
    c = fc.compare_models(fc.joint_tally(truth, a, b), n_resamples=1000, seed=1)
    unpaired = fc.bootstrap_difference(tally(truth, a), tally(truth, b), n_resamples=1000, seed=1)
    assert c.ci[1] - c.ci[0] < 0.5 * float(unpaired.high - unpaired.low)
    assert c.ci[0] > 0


def test_permutation_distribution_matches_exact_enumeration():
    # exact: all 2^9 ways of swapping the two predictions of 9 samples
    truth = np.array([0, 0, 1, 1, 2, 2, 0, 1, 2])
    a = np.array([0, 1, 1, 2, 2, 0, 0, 1, 1])
    b = np.array([0, 0, 1, 1, 2, 2, 1, 0, 2])
    observed = matthews_corrcoef(truth, b) - matthews_corrcoef(truth, a)
    exact = []
    for swap in itertools.product([False, True], repeat=9):
        s = np.array(swap)
        a2, b2 = np.where(s, b, a), np.where(s, a, b)
        exact.append(matthews_corrcoef(truth, b2) - matthews_corrcoef(truth, a2))
    exact = np.array(exact)
    p_exact = np.mean(np.abs(exact) >= abs(observed) - 1e-12)
    j = fc.joint_tally(truth, a, b)
    t_a, t_b = model_tensors(j)
    pair = PairStrata.of(dense_cells(j), clustered=False)
    draws = permutation_draws(pair, np.random.default_rng(6), 20_000, fc.rk)
    p_mc = np.mean(np.abs(draws) >= abs(observed) - 1e-12)
    assert abs(p_mc - p_exact) < 5 * math.sqrt(p_exact * (1 - p_exact) / 20_000)
    # and the distribution itself: mean and spread of the difference
    assert abs(draws.mean() - exact.mean()) < 5 * exact.std() / math.sqrt(20_000)
    c = fc.compare_models(j, n_resamples=100, n_permutations=20_000, seed=6)
    assert c.p_value == pytest.approx(p_exact, abs=5 * math.sqrt(p_exact * (1 - p_exact) / 20_000) + 1e-4)


def test_null_p_values_are_uniform_and_a_clear_winner_is_detected():
    # under exchangeable predictions (both drawn from one model) the p-values are
    # uniform: Kolmogorov-Smirnov against U(0, 1) with scipy.stats.kstest
    rng = np.random.default_rng(7)
    p = []
    for _ in range(150):
        truth, a, b = _models(rng, 300, 3, 0.6, 0.6)
        p.append(fc.compare_models(fc.joint_tally(truth, a, b), n_resamples=100,
                                   n_permutations=199, seed=rng).p_value)
    assert stats.kstest(p, "uniform").pvalue > 0.01
    truth, a, b = _models(rng, 300, 3, 0.5, 0.8)
    better = fc.compare_models(fc.joint_tally(truth, a, b), n_resamples=500, seed=8)
    assert better.p_value < 0.01 and better.better == "b" and better.decided


def test_identical_models_cannot_be_told_apart():
    rng = np.random.default_rng(9)
    truth, a, _ = _models(rng, 200, 3, 0.7, 0.7)
    c = fc.compare_models(fc.joint_tally(truth, a, a), n_resamples=200, seed=0)
    assert c.difference == 0 and c.ci == (0.0, 0.0) and c.p_value == 1.0
    assert not c.decided and c.better is None


def test_single_class_truth_is_reported_not_silent():
    c = fc.compare_models(fc.joint_tally(["a"] * 20, ["a"] * 15 + ["b"] * 5, ["a"] * 20),
                          n_resamples=100, seed=0)
    assert any("undefined" in w for w in c.warnings)


def test_compare_options_are_checked():
    j = fc.joint_tally([0, 1, 1], [0, 1, 0], [0, 1, 1])
    with pytest.raises(OptionError, match=r"`n_resamples` must be a whole number of at least 100"):
        fc.compare_models(j, n_resamples=10)
    with pytest.raises(OptionError, match=r"`n_permutations` must be a whole number of at least 100"):
        fc.compare_models(j, n_permutations=5)
    with pytest.raises(OptionError, match=r"`level` must be a number strictly between 0 and 1"):
        fc.compare_models(j, level=1.0)

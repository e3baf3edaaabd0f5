"""Tests of foldcorr.analysis.uncertainty against outside references.

Monte Carlo tolerances: the standard error of an estimated q-quantile from B
draws is sqrt(q (1 - q) / B) / f(x_q) (asymptotic order statistics; e.g.
Efron & Tibshirani 1993, section 19.3). For a roughly normal statistic with
spread sigma and q = 0.025 this is about 2.67 sigma / sqrt(B). Two independent
estimates differ with standard error 2.67 sigma sqrt(1/B1 + 1/B2); the checks
allow 4 of those, so a correct implementation fails about once in 15 000 runs
and the seeds are fixed anyway.
"""

from __future__ import annotations

import math
import statistics
import warnings

import numpy as np
import pytest
import xarray as xr
from scipy import stats
from sklearn.metrics import matthews_corrcoef

import foldcorr as fc
# `foldcorr.tensor` names both a module and a function; import the function directly
from foldcorr.tensor import confusion_tensor, tally
from foldcorr.errors import InvalidTensorError, OptionError, UndefinedMetricWarning
from foldcorr.analysis.intervals import jackknife_moments


def _labels(rng, n, k, acc):
    truth = rng.integers(0, k, n)
    pred = np.where(rng.random(n) < acc, truth, rng.integers(0, k, n))
    return truth, pred


def _tolerance(sigma, b1, b2):
    return 4 * 2.67 * sigma * math.sqrt(1 / b1 + 1 / b2)


# ----------------------------------------------------------------------------- resampling


def test_resample_cells_keeps_each_fold_total_and_is_reproducible():
    rng = np.random.default_rng(0)
    truth, pred = _labels(rng, 120, 3, 0.7)
    t = tally(truth, pred, folds=np.repeat([1, 2, 3], 40))
    r = fc.resample_cells(t, 50, seed=3)
    assert r.dims == ("resample", "fold", "actual", "predicted")
    assert (r.sum(("actual", "predicted")) == 40).all()
    # cells that are empty stay empty: a resample only holds observed (actual, predicted) pairs
    assert ((t.values == 0)[None] <= (r.values == 0)).all()
    xr.testing.assert_equal(r, fc.resample_cells(t, 50, seed=3))
    assert not r.equals(fc.resample_cells(t, 50, seed=4))


def test_resampled_cells_have_multinomial_moments():
    # Mean N p and variance N p (1 - p) of a multinomial cell (common practice,
    # textbook identities); checked to 5 standard errors over 20 000 draws.
    t = confusion_tensor([[30, 10], [5, 55]], ["a", "b"])
    draws = fc.resample_cells(t, 20_000, seed=1).values.reshape(20_000, 4).astype(float)
    n, p = 100, t.values.ravel() / 100
    assert np.all(np.abs(draws.mean(0) - n * p) < 5 * np.sqrt(n * p * (1 - p) / 20_000))
    var = n * p * (1 - p)
    # variance of a sample variance is about 2 var^2 / B for near-normal counts
    assert np.all(np.abs(draws.var(0, ddof=1) - var) < 5 * var * np.sqrt(2 / 20_000) * 1.5)


def test_statistic_is_applied_once_to_all_resamples_and_matches_a_loop():
    rng = np.random.default_rng(2)
    t = tally(*_labels(rng, 200, 4, 0.6))
    r = fc.resample_cells(t, 30, seed=5)
    vectorised = fc.drag(r)
    looped = xr.concat([fc.drag(r.isel(resample=i)) for i in range(30)], "resample")
    np.testing.assert_allclose(vectorised.values, looped.values, rtol=0, atol=1e-14)


# ----------------------------------------------------------------------------- against per-sample resampling


def test_percentile_interval_matches_per_sample_resampling_with_sklearn_stratified():
    # reference: indices drawn with replacement within each fold, scored with
    # sklearn.metrics.matthews_corrcoef (multiclass R_K)
    rng = np.random.default_rng(11)
    truth, pred = _labels(rng, 240, 3, 0.65)
    folds = np.repeat([0, 1, 2], 80)
    ours = fc.bootstrap(tally(truth, pred, folds=folds), n_resamples=4000, seed=1,
                        keep_draws=True)
    ref_rng = np.random.default_rng(12)
    groups = [np.flatnonzero(folds == f) for f in range(3)]
    ref = []
    for _ in range(1000):
        idx = np.concatenate([g[ref_rng.integers(0, 80, 80)] for g in groups])
        ref.append(matthews_corrcoef(truth[idx], pred[idx]))
    low, high = np.quantile(ref, [0.025, 0.975])
    tol = _tolerance(float(ours.draws.std()), 4000, 1000)
    assert abs(float(ours.low) - low) < tol
    assert abs(float(ours.high) - high) < tol
    assert float(ours.estimate) == pytest.approx(matthews_corrcoef(truth, pred), abs=1e-12)


def test_bca_interval_matches_scipy_bootstrap_with_sklearn_statistic():
    # reference: scipy.stats.bootstrap(method="BCa", paired) over samples with
    # sklearn.metrics.matthews_corrcoef as the statistic
    rng = np.random.default_rng(21)
    truth, pred = _labels(rng, 150, 3, 0.6)
    ours = fc.bootstrap(tally(truth, pred), n_resamples=4000, method="bca", seed=2,
                        keep_draws=True)
    ref = stats.bootstrap((truth, pred), matthews_corrcoef, paired=True, vectorized=False,
                          n_resamples=2000, method="BCa", random_state=3)
    # BCa reads quantiles further in the tail (about 0.01 here, where the
    # order-statistic error is 3.77 sigma / sqrt(B) rather than 2.67) and also
    # estimates z0 from the draws, so the tolerance is scaled up accordingly
    tol = 1.5 * 3.77 / 2.67 * _tolerance(float(ours.draws.std()), 4000, 2000)
    assert abs(float(ours.low) - ref.confidence_interval.low) < tol
    assert abs(float(ours.high) - ref.confidence_interval.high) < tol


def test_cell_jackknife_equals_per_sample_jackknife():
    # BCa acceleration a = sum d^3 / (6 (sum d^2)^1.5), d = mean - theta_(i)
    # (Efron & Tibshirani 1993, eq. 14.15), from all N leave-one-out values
    # computed with sklearn.metrics.matthews_corrcoef; exact, not Monte Carlo.
    rng = np.random.default_rng(31)
    truth, pred = _labels(rng, 60, 3, 0.6)
    loo = np.array([matthews_corrcoef(np.delete(truth, i), np.delete(pred, i))
                    for i in range(60)])
    d = loo.mean() - loo
    a_ref = (d**3).sum() / (6 * (d**2).sum() ** 1.5)
    t = tally(truth, pred)
    est = fc.rk(t)
    num, den = jackknife_moments(t, fc.rk, True, est, "R_K")
    assert float(num) / (6 * float(den) ** 1.5) == pytest.approx(a_ref, rel=1e-9)


def test_per_class_mcc_intervals_match_per_sample_one_vs_rest():
    # reference: per resample, sklearn.metrics.matthews_corrcoef of (truth == k, pred == k)
    rng = np.random.default_rng(41)
    truth, pred = _labels(rng, 200, 3, 0.6)
    ours = fc.bootstrap(tally(truth, pred), fc.ovr_mcc, n_resamples=3000, seed=4,
                        keep_draws=True)
    assert ours.low.dims == ("class",)
    ref_rng = np.random.default_rng(42)
    ref = np.empty((500, 3))
    for r in range(500):
        idx = ref_rng.integers(0, 200, 200)
        for k in range(3):
            ref[r, k] = matthews_corrcoef(truth[idx] == k, pred[idx] == k)
    low, high = np.quantile(ref, [0.025, 0.975], axis=0)
    sigma = ours.draws.std("resample").values
    tol = _tolerance(sigma, 3000, 500)
    assert np.all(np.abs(ours.low.values - low) < tol)
    assert np.all(np.abs(ours.high.values - high) < tol)


def test_difference_matches_two_independent_per_sample_bootstraps():
    rng = np.random.default_rng(51)
    ya, pa = _labels(rng, 150, 2, 0.7)
    yb, pb = _labels(rng, 180, 2, 0.85)
    ours = fc.bootstrap_difference(tally(ya, pa), tally(yb, pb), n_resamples=3000,
                                   seed=5, keep_draws=True)
    assert float(ours.estimate) == pytest.approx(
        matthews_corrcoef(yb, pb) - matthews_corrcoef(ya, pa), abs=1e-12)
    ref_rng = np.random.default_rng(52)
    ref = []
    for _ in range(700):
        ia, ib = ref_rng.integers(0, 150, 150), ref_rng.integers(0, 180, 180)
        ref.append(matthews_corrcoef(yb[ib], pb[ib]) - matthews_corrcoef(ya[ia], pa[ia]))
    low, high = np.quantile(ref, [0.025, 0.975])
    tol = _tolerance(float(ours.draws.std()), 3000, 700)
    assert abs(float(ours.low) - low) < tol and abs(float(ours.high) - high) < tol


# ----------------------------------------------------------------------------- shapes and options


def test_per_fold_and_per_label_intervals_broadcast():
    rng = np.random.default_rng(61)
    truth, pred = _labels(rng, 300, 3, 0.7)
    t = tally(truth, pred, folds=np.arange(300) % 3)
    per_fold = fc.bootstrap(t, n_resamples=200, seed=0, pool=False)
    assert per_fold.low.dims == ("fold",)
    np.testing.assert_allclose(per_fold.estimate, fc.rk(t))
    # a multilabel tensor: dims (label, actual, predicted) with [False, True] classes
    y = rng.random((200, 4)) < 0.4
    yhat = np.where(rng.random((200, 4)) < 0.8, y, ~y)
    ml = xr.concat([tally(y[:, j], yhat[:, j]) for j in range(4)], "label")
    ml = ml.assign_coords(label=list("wxyz"))
    res = fc.bootstrap(ml, n_resamples=200, seed=0, method="bca")
    assert res.low.dims == ("label",)
    expected = [matthews_corrcoef(y[:, j], yhat[:, j]) for j in range(4)]  # sklearn
    np.testing.assert_allclose(res.estimate.values, expected, atol=1e-12)
    assert np.all(res.low.values <= res.estimate.values)
    assert np.all(res.estimate.values <= res.high.values)


def test_same_seed_same_interval_and_shared_resamples():
    rng = np.random.default_rng(71)
    t = tally(*_labels(rng, 100, 3, 0.6))
    a = fc.bootstrap(t, n_resamples=300, seed=9)
    b = fc.bootstrap(t, n_resamples=300, seed=9)
    assert float(a.low) == float(b.low) and float(a.high) == float(b.high)
    u = fc.summarise_uncertainty(t, n_resamples=300, seed=9)
    assert float(u.rk.low) == float(a.low)


def test_fold_statistics_by_hand_from_the_nadeau_bengio_formula():
    # per-fold MCC from sklearn; corrected variance (1/J + n_test/n_train) s^2
    # (Nadeau & Bengio 2003, eq. for the corrected resampled t); t quantile from scipy.stats.t
    rng = np.random.default_rng(81)
    truth, pred = _labels(rng, 250, 2, 0.75)
    folds = np.arange(250) % 5
    fs = fc.fold_statistics(tally(truth, pred, folds=folds))
    per = [matthews_corrcoef(truth[folds == f], pred[folds == f]) for f in range(5)]
    mean, s = statistics.fmean(per), statistics.stdev(per)
    half = stats.t.ppf(0.975, 4) * math.sqrt((1 / 5 + 1 / 4) * s**2)
    assert fs.mean == pytest.approx(mean, abs=1e-12)
    assert fs.sd == pytest.approx(s, abs=1e-12)
    assert fs.corrected_ci == pytest.approx((mean - half, mean + half), abs=1e-12)
    assert fs.pooled == pytest.approx(matthews_corrcoef(truth, pred), abs=1e-12)
    assert (fs.min, fs.max) == pytest.approx((min(per), max(per)), abs=1e-12)
    other = fc.fold_statistics(tally(truth, pred, folds=folds), test_train_ratio=0.5,
                               level=0.9)
    half = stats.t.ppf(0.95, 4) * math.sqrt((1 / 5 + 0.5) * s**2)
    assert other.corrected_ci == pytest.approx((mean - half, mean + half), abs=1e-12)


def test_fold_statistics_warns_when_pooled_and_averaged_disagree():
    # each fold holds a different pair of classes; within a fold the model is
    # weak, but pooling rewards it for telling the folds' classes apart
    rng = np.random.default_rng(91)
    truth, pred, folds = [], [], []
    for f, pair in enumerate(([0, 1], [2, 3], [4, 5])):
        y = rng.choice(pair, 200)
        yhat = np.where(rng.random(200) < 0.3, y, rng.choice(pair, 200))
        truth.append(y), pred.append(yhat), folds.append(np.full(200, f))
    fs = fc.fold_statistics(tally(np.concatenate(truth), np.concatenate(pred),
                                     folds=np.concatenate(folds)))
    assert fs.pooled - fs.mean > 0.2
    assert fs.warnings and "differ by" in fs.warnings[0]


def test_homogeneous_folds_give_no_pooled_warning():
    rng = np.random.default_rng(92)
    truth, pred = _labels(rng, 2000, 3, 0.7)
    fs = fc.fold_statistics(tally(truth, pred, folds=np.arange(2000) % 5))
    assert fs.warnings == ()


# ----------------------------------------------------------------------------- bad input


@pytest.mark.parametrize("level", [0, 1, -0.5, 1.5, "0.95", float("nan"), True])
def test_level_outside_open_unit_interval_is_refused(level):
    t = confusion_tensor([[5, 1], [2, 7]], [0, 1])
    with pytest.raises(OptionError, match=r"`level` must be a number strictly between 0 and 1"):
        fc.bootstrap(t, level=level)


def test_too_few_resamples_and_unknown_method_are_refused():
    t = confusion_tensor([[5, 1], [2, 7]], [0, 1])
    with pytest.raises(OptionError, match=r"`n_resamples` must be a whole number of at least 100; got 99"):
        fc.bootstrap(t, n_resamples=99)
    with pytest.raises(OptionError, match=r"`method` must be one of 'percentile', 'bca'; got 'normal'"):
        fc.bootstrap(t, method="normal")


def test_weighted_tensor_is_refused_with_a_clear_message():
    t = tally([0, 1, 1, 0], [0, 1, 0, 0], weights=[0.5, 1.0, 2.0, 1.0])
    with pytest.raises(InvalidTensorError, match=r"needs whole counts; this tensor holds weighted "
                                                 r"sums \(float64 counts, e.g. 1.5 at actual=0"):
        fc.bootstrap(t, n_resamples=100)


@pytest.mark.parametrize("weight", [1.0, 10.0])
def test_weighted_tensor_is_refused_even_with_whole_weights(weight):
    # A bootstrap interval narrows as 1/sqrt(N) (common practice): resampling a weight of 10
    # as 10 samples would give an interval sqrt(10) times too narrow. So any weighted tally
    # (float64 counts) is refused, whatever its values.
    t = tally([0, 1, 1, 0, 1], [0, 1, 0, 0, 1], weights=[weight] * 5)
    assert (t.values == weight * np.array([[2, 0], [1, 2]])).all()
    with pytest.raises(InvalidTensorError, match=r"weighted sums \(float64 counts"):
        fc.bootstrap(t, n_resamples=100)
    with pytest.raises(InvalidTensorError, match="weighted sums"):
        fc.resample_cells(t, 3, seed=0)
    with pytest.raises(InvalidTensorError, match="weighted sums"):
        fc.bootstrap_difference(t, t, n_resamples=100)


def test_recorded_weight_column_is_refused_and_integer_counts_accepted():
    import pandas as pd

    df = pd.DataFrame({"actual": [0, 1, 1, 0] * 10, "predicted": [0, 1, 0, 0] * 10, "w": 3})
    weighted = fc.tally_frame(df, weight="w")
    assert weighted.dtype == np.float64 and weighted.attrs["weight_column"] == "w"
    # Cast to integers, it still records its weight column: still refused.
    with pytest.raises(InvalidTensorError, match=r"tallied with the weight column 'w'"):
        fc.bootstrap(weighted.astype(np.int64), n_resamples=100)
    plain = fc.tally_frame(df)
    assert plain.dtype == np.int64
    assert fc.bootstrap(plain, n_resamples=100, seed=0).n_resamples == 100
    # Plain counts held as floats are refused with a hint; as integers they are accepted.
    floats = confusion_tensor([[20.0, 0.0], [10.0, 10.0]], [0, 1])
    with pytest.raises(InvalidTensorError, match=r"give them an integer dtype"):
        fc.bootstrap(floats, n_resamples=100)
    assert fc.bootstrap(floats.astype(np.int64), n_resamples=100, seed=0).n_resamples == 100


def test_empty_fold_is_refused():
    t = confusion_tensor([[[3, 1], [0, 2]], [[0, 0], [0, 0]]], [0, 1], leading={"fold": [1, 2]})
    with pytest.raises(InvalidTensorError, match=r"cannot resample: fold=2 holds no samples"):
        fc.bootstrap(t)


def test_single_class_truth_gives_labelled_undefined_results_not_silent_nan():
    t = tally(["a"] * 30, ["a"] * 20 + ["b"] * 10)
    with pytest.warns(UndefinedMetricWarning, match="bootstrap of R_K: undefined"):
        res = fc.bootstrap(t, n_resamples=100, seed=0)
    assert res.warnings and "undefined" in res.warnings[0]
    from functools import partial

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        nan = fc.bootstrap(t, partial(fc.rk, undefined="nan"), n_resamples=100, seed=0)
    assert math.isnan(float(nan.low)) and "no interval given" in nan.warnings[0]


def test_bca_refuses_a_statistic_that_drops_a_leading_dim():
    t = tally([0, 1, 1, 0, 1], [0, 1, 0, 0, 1], folds=[1, 1, 1, 2, 2])
    with pytest.raises(OptionError, match=r"method='bca' needs a statistic that keeps the leading dims \['fold'\]"):
        fc.bootstrap(t, lambda x: fc.rk(x).mean("fold"), n_resamples=100, method="bca",
                     pool=False)


def test_fold_statistics_needs_two_folds():
    with pytest.raises(InvalidTensorError, match=r"at least 2 folds; got 'no fold dim'"):
        fc.fold_statistics(confusion_tensor([[5, 1], [2, 7]], [0, 1]))
    t = tally([0, 1, 1, 0], [0, 1, 0, 0], folds=[1, 1, 2, 2])
    with pytest.raises(OptionError, match=r"`test_train_ratio` must be a positive number"):
        fc.fold_statistics(t, test_train_ratio=0)


def test_resamples_bounded_in_the_library():
    # the library refuses what the command line refuses: more than 10^6 resamples
    from foldcorr.analysis.resampling import check_resamples
    from foldcorr.errors import MAX_RESAMPLES
    assert check_resamples(MAX_RESAMPLES) == 10**6
    with pytest.raises(OptionError, match=r"`n_resamples` must be a whole number of at most "
                                          r"1,000,000; got 1000001"):
        check_resamples(10**6 + 1)
    with pytest.raises(OptionError, match=r"at least 100; got 99"):
        check_resamples(99)


def test_command_line_and_library_share_one_resample_limit():
    # one limit: the command line's --resamples refuses exactly what check_resamples refuses above
    import argparse

    from foldcorr.cli.args import RESAMPLES
    from foldcorr.errors import MAX_RESAMPLES
    assert RESAMPLES(str(MAX_RESAMPLES)) == MAX_RESAMPLES
    with pytest.raises(argparse.ArgumentTypeError, match="from 1 to 1,000,000"):
        RESAMPLES(str(MAX_RESAMPLES + 1))

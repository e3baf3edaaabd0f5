"""Multilabel tensors and figures, checked against scikit-learn."""

import warnings

import numpy as np
import pytest
from sklearn.metrics import matthews_corrcoef, multilabel_confusion_matrix

from foldcorr.errors import InvalidInputError, UndefinedMetricWarning
from foldcorr.evaluation import evaluate
from foldcorr.tensor import indicators_from_sets, multilabel_tally


def _random(n=300, n_labels=7, seed=0):
    rng = np.random.default_rng(seed)
    truth = rng.random((n, n_labels)) < np.linspace(0.05, 0.6, n_labels)
    flip = rng.random((n, n_labels)) < 0.2
    return truth, truth ^ flip, rng.integers(0, 4, n)


def test_tensor_equals_reference_per_label():
    # sklearn.metrics.multilabel_confusion_matrix: per label [[TN, FP], [FN, TP]]
    truth, pred, _ = _random()
    t = multilabel_tally(truth, pred)
    np.testing.assert_array_equal(t.values, multilabel_confusion_matrix(truth, pred))


def test_folds_and_weights_match_reference():
    # sklearn.metrics.multilabel_confusion_matrix with sample_weight, per fold
    truth, pred, folds = _random(seed=1)
    w = np.random.default_rng(2).random(len(folds))
    t = multilabel_tally(truth, pred, folds=folds, weights=w)
    for f in range(4):
        sel = folds == f
        ref = multilabel_confusion_matrix(truth[sel], pred[sel], sample_weight=w[sel])
        np.testing.assert_allclose(t.sel(fold=f).values, ref)


def test_mcc_per_label_micro_macro_weighted_match_reference():
    # sklearn.metrics.matthews_corrcoef per column; micro = on the raveled indicators
    truth, pred, folds = _random(seed=3)
    ev = evaluate(multilabel_tally(truth, pred, labels=list("abcdefg")))
    per = ev.per_label.sortby("label")
    ref = [matthews_corrcoef(truth[:, j], pred[:, j]) for j in range(truth.shape[1])]
    np.testing.assert_allclose(per["mcc"].values, ref, atol=1e-12)
    assert ev.micro_mcc == pytest.approx(matthews_corrcoef(truth.ravel(), pred.ravel()), abs=1e-12)
    assert ev.macro_mcc == pytest.approx(np.mean(ref), abs=1e-12)
    support = truth.sum(axis=0)
    assert ev.weighted_mcc == pytest.approx(np.average(ref, weights=support), abs=1e-12)
    np.testing.assert_array_equal(per["in_truth"].values, support)
    np.testing.assert_allclose(per["prevalence"].values, truth.mean(axis=0))


def test_per_fold_figures_match_reference():
    # sklearn.metrics.matthews_corrcoef, fold by fold
    truth, pred, folds = _random(seed=4)
    ev = evaluate(multilabel_tally(truth, pred, folds=folds))
    for f in range(4):
        sel = folds == f
        micro = matthews_corrcoef(truth[sel].ravel(), pred[sel].ravel())
        macro = np.mean([matthews_corrcoef(truth[sel, j], pred[sel, j]) for j in range(7)])
        assert float(ev.folds["micro_mcc"].sel(fold=f)) == pytest.approx(micro, abs=1e-12)
        assert float(ev.folds["macro_mcc"].sel(fold=f)) == pytest.approx(macro, abs=1e-12)


def test_sorted_by_cost():
    truth, pred, _ = _random(seed=5)
    ev = evaluate(multilabel_tally(truth, pred))
    cost = ev.per_label["cost"].values
    assert (np.diff(cost) <= 0).all()
    expected = (1 - ev.per_label["mcc"].values) * ev.per_label["in_truth"].values
    np.testing.assert_allclose(cost, expected)


def test_label_without_positives_warns_and_follows_convention():
    # MCC is 0/0 when a label has no positives anywhere; zero convention gives 0 (common practice)
    truth = np.array([[1, 0], [0, 0], [1, 0]])
    pred = np.array([[1, 0], [0, 0], [0, 0]])
    ev = evaluate(multilabel_tally(truth, pred, labels=["owl", "wren"]))
    assert float(ev.per_label["mcc"].sel(label="wren")) == 0.0
    assert any("wren" in w for w in ev.warnings)
    # the absent label does not enter the macro mean
    assert ev.macro_mcc == pytest.approx(float(ev.per_label["mcc"].sel(label="owl")))
    t = multilabel_tally(truth, pred, labels=["owl", "wren"])
    nan = evaluate(t, undefined="nan")
    assert np.isnan(float(nan.per_label["mcc"].sel(label="wren")))


def test_majority_everywhere_gives_accuracy_ten_elevenths_and_mcc_zero():
    # 10:1 imbalance, always predicting the majority: accuracy 10/11, MCC 0 (common practice)
    truth = np.array([[0]] * 10 + [[1]])
    pred = np.zeros_like(truth)
    t = multilabel_tally(truth, pred)
    from foldcorr.metrics import accuracy
    assert float(accuracy(t.isel(label=0))) == pytest.approx(10 / 11)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        assert evaluate(t).micro_mcc == 0.0


def test_sets_to_indicators():
    ind, labels = indicators_from_sets([["a", "c"], [], ["b"]], ["a", "b", "c"])
    assert labels == ["a", "b", "c"]
    assert ind.astype(int).tolist() == [[1, 0, 1], [0, 0, 0], [0, 1, 0]]


def test_bad_input():
    with pytest.raises(InvalidInputError, match=r"label 'z' is not in the label list"):
        indicators_from_sets([["a"], ["z"]], ["a", "b"], name="column 'tags'")
    with pytest.raises(InvalidInputError, match="differ in shape"):
        multilabel_tally(np.zeros((3, 2)), np.zeros((3, 3)))
    with pytest.raises(InvalidInputError, match=r"indicator 2 is not 0/1"):
        multilabel_tally([[0, 2]], [[0, 1]])
    with pytest.raises(InvalidInputError, match="names 1 labels but the indicators have 2"):
        multilabel_tally([[0, 1]], [[0, 1]], labels=["a"])


def test_no_labels_at_all():
    with pytest.raises(InvalidInputError, match="no labels to evaluate"):
        multilabel_tally(np.zeros((3, 0), bool), np.zeros((3, 0), bool))


def _mcc_along(y, p, axis=-1):
    # binary MCC of paired 0/1 arrays along an axis (Matthews 1975), for scipy's bootstrap
    y, p = np.asarray(y, float), np.asarray(p, float)
    n = y.shape[axis]
    tp = (y * p).sum(axis)
    pos, pp = y.sum(axis), p.sum(axis)
    den = np.sqrt(pp * (n - pp) * pos * (n - pos))
    return np.where(den > 0, (n * tp - pos * pp) / np.where(den > 0, den, 1), 0.0)


def test_intervals_match_per_sample_bootstrap():
    # scipy.stats.bootstrap resampling samples (rows) with replacement, percentile method; our
    # intervals come from resampling cells: equal within Monte Carlo error (DESIGN.md, Efron &
    # Tibshirani 1993). Labels are drawn independently here, so micro MCC matches too.
    from scipy.stats import bootstrap as scipy_bootstrap

    from foldcorr.analysis.multilabel import multilabel_intervals

    rng = np.random.default_rng(21)
    n = 400
    truth = rng.random((n, 3)) < [0.2, 0.4, 0.6]
    pred = truth ^ (rng.random((n, 3)) < 0.2)
    ci = multilabel_intervals(multilabel_tally(truth, pred, labels=list("abc")),
                              n_resamples=4000, seed=5)
    for j, label in enumerate("abc"):
        ref = scipy_bootstrap((truth[:, j], pred[:, j]), _mcc_along, paired=True,
                              vectorized=True, n_resamples=4000, method="percentile",
                              random_state=np.random.default_rng(j)).confidence_interval
        low, high = ci.label_interval(label)
        assert low == pytest.approx(ref.low, abs=0.025)
        assert high == pytest.approx(ref.high, abs=0.025)
    rows = np.arange(n)
    ref = scipy_bootstrap((rows,), lambda r, axis=-1: _mcc_along(
        truth[r].reshape(*r.shape[:-1], -1), pred[r].reshape(*r.shape[:-1], -1)),
        vectorized=True, n_resamples=2000, method="percentile",
        random_state=np.random.default_rng(9)).confidence_interval
    assert ci.micro_mcc[0] == pytest.approx(ref.low, abs=0.025)
    assert ci.micro_mcc[1] == pytest.approx(ref.high, abs=0.025)
    macro = evaluate(multilabel_tally(truth, pred)).macro_mcc
    assert ci.macro_mcc[0] < macro < ci.macro_mcc[1]


def test_intervals_refuse_weighted_tensors():
    from foldcorr.errors import FoldcorrError
    from foldcorr.analysis.multilabel import multilabel_intervals

    t = multilabel_tally([[1, 0], [0, 1]], [[1, 0], [0, 1]], weights=[0.5, 1.5])
    with pytest.raises(FoldcorrError, match="weight"):
        multilabel_intervals(t, n_resamples=100, seed=1)
    # Whole weights are still weights, not sample counts.
    t = multilabel_tally([[1, 0], [0, 1]], [[1, 0], [0, 1]], weights=[10, 10])
    with pytest.raises(FoldcorrError, match="weighted sums"):
        multilabel_intervals(t, n_resamples=100, seed=1)


def test_macro_and_weighted_propagate_an_undefined_label_under_nan():
    # Label "c" is positive in every sample: MCC 0/0 (truth has no spread). Under
    # undefined="zero" it counts as 0, sklearn.metrics.matthews_corrcoef's own convention;
    # under undefined="nan" a mean over a set holding an undefined value is undefined
    # (numpy.mean propagates NaN), as foldcorr.metrics.macro_mcc does for classes.
    truth, pred, folds = _random(n=200, n_labels=2, seed=6)
    truth = np.column_stack([truth, np.ones(len(truth), dtype=bool)])
    pred = np.column_stack([pred, np.random.default_rng(7).random(len(truth)) < 0.7])
    t = multilabel_tally(truth, pred, labels=["a", "b", "c"], folds=folds)
    ref = [matthews_corrcoef(truth[:, j], pred[:, j]) for j in range(3)]
    support = truth.sum(axis=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        zero = evaluate(t)
        nan = evaluate(t, undefined="nan")
    assert ref[2] == 0.0
    assert zero.macro_mcc == pytest.approx(np.mean(ref), abs=1e-12)
    assert zero.weighted_mcc == pytest.approx(np.average(ref, weights=support), abs=1e-12)
    with_nan = [ref[0], ref[1], np.nan]
    assert np.isnan(np.mean(with_nan)) and np.isnan(nan.macro_mcc)
    assert np.isnan(np.average(with_nan, weights=support)) and np.isnan(nan.weighted_mcc)
    assert not np.isnan(nan.micro_mcc)  # the pooled 2 x 2 table is defined
    assert nan.folds["macro_mcc"].isnull().all()
    assert not zero.folds["macro_mcc"].isnull().any()


def test_weighted_mcc_ignores_an_undefined_label_without_support():
    # A label never positive in truth has support 0, so weight 0: it adds nothing to
    # sum(n+ MCC) / sum(n+) even when its MCC is undefined (NaN under undefined="nan").
    truth, pred, _ = _random(n=200, n_labels=2, seed=8)
    truth = np.column_stack([truth, np.zeros(len(truth), dtype=bool)])
    pred = np.column_stack([pred, np.zeros(len(truth), dtype=bool)])
    t = multilabel_tally(truth, pred, labels=["a", "b", "c"])
    ref = [matthews_corrcoef(truth[:, j], pred[:, j]) for j in range(2)]  # sklearn
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        ev = evaluate(t, undefined="nan")
    assert np.isnan(ev.per_label.sel(label="c")["mcc"])
    assert ev.weighted_mcc == pytest.approx(np.average(ref, weights=truth[:, :2].sum(0)), abs=1e-12)
    assert ev.macro_mcc == pytest.approx(np.mean(ref), abs=1e-12)  # "c" is absent: left out


def test_macro_interval_propagates_nan_in_resamples():
    from foldcorr.analysis.multilabel import _macro_of, _weighted_of

    truth, pred, _ = _random(n=200, n_labels=2, seed=6)
    truth = np.column_stack([truth, np.ones(len(truth), dtype=bool)])
    pred = np.column_stack([pred, np.random.default_rng(7).random(len(truth)) < 0.7])
    t = multilabel_tally(truth, pred, labels=["a", "b", "c"])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        assert np.isnan(float(_macro_of(t, undefined="nan")))
        assert np.isnan(float(_weighted_of(t, undefined="nan")))

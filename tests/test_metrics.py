"""Metrics against scikit-learn, scipy.stats, published examples and identities."""

import warnings

import numpy as np
import pytest
import xarray as xr
from hypothesis import assume, given
from hypothesis import strategies as st
from scipy.stats import chi2_contingency, pearsonr
from sklearn.metrics import (
    accuracy_score,
    balanced_accuracy_score,
    cohen_kappa_score,
    f1_score,
    matthews_corrcoef,
    precision_score,
    recall_score,
)
from strategies import count_matrices, label_arrays

import foldcorr as fc
from foldcorr import UndefinedMetricWarning
from foldcorr.testing import expand_counts

TOL = 1e-12


def quiet(fn, *args, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn(*args, **kw)


@given(label_arrays(folds=True))
def test_rk_equals_reference_per_fold_and_pooled(data):
    # Reference: sklearn.metrics.matthews_corrcoef (multiclass form), which returns 0.0 when undefined.
    t = fc.tally(data["truth"], data["pred"], folds=data["folds"])
    per_fold = quiet(fc.rk, t)
    for fold in t.coords["fold"].values:
        keep = data["folds"] == fold
        ref = quiet(matthews_corrcoef, data["truth"][keep], data["pred"][keep])
        assert abs(float(per_fold.sel(fold=fold)) - ref) < TOL
    assert abs(float(quiet(fc.rk, fc.pool(t))) - quiet(matthews_corrcoef, data["truth"], data["pred"])) < TOL


@given(label_arrays(weights=True))
def test_weighted_rk_equals_reference(data):
    # Reference: sklearn.metrics.matthews_corrcoef(sample_weight=...).
    t = fc.tally(data["truth"], data["pred"], weights=data["weights"])
    ours = float(quiet(fc.rk, t))
    if len(set(data["truth"])) == 1 or len(set(data["pred"])) == 1:
        # Undefined (0/0). With weights the reference computes s^2 - sum(t^2) by cancellation and
        # can return NaN from a rounding residue; our sum of t_k (s - t_k) is exactly 0.
        assert ours == 0.0
        return
    ref = quiet(matthews_corrcoef, data["truth"], data["pred"], sample_weight=data["weights"])
    assert abs(ours - ref) < 1e-10


@given(label_arrays())
def test_one_vs_rest_mcc_equals_reference_binary_mcc(data):
    # Reference: sklearn.metrics.matthews_corrcoef on the binary indicators of each class.
    t = fc.tally(data["truth"], data["pred"])
    ovr = quiet(fc.ovr_mcc, t)
    for k in t.coords["actual"].values:
        ref = quiet(matthews_corrcoef, data["truth"] == k, data["pred"] == k)
        assert abs(float(ovr.sel({"class": k})) - ref) < TOL


@given(label_arrays(min_size=2))
def test_companions_equal_reference(data):
    # References: sklearn.metrics accuracy_score, balanced_accuracy_score, cohen_kappa_score,
    # f1_score(average=None / "macro"), recall_score / precision_score(average=None).
    y, p = data["truth"], data["pred"]
    t = fc.tally(y, p)
    labels = t.coords["actual"].values
    assert abs(float(fc.accuracy(t)) - accuracy_score(y, p)) < TOL
    assert abs(float(quiet(fc.balanced_accuracy, t)) - quiet(balanced_accuracy_score, y, p)) < TOL
    kappa = quiet(cohen_kappa_score, y, p)
    ours = float(quiet(fc.cohen_kappa, t, undefined="nan"))
    assert (np.isnan(kappa) and np.isnan(ours)) or abs(ours - kappa) < TOL
    np.testing.assert_allclose(quiet(fc.f1, t).values,
                               f1_score(y, p, labels=labels, average=None, zero_division=0), atol=TOL)
    assert abs(float(quiet(fc.macro_f1, t)) - f1_score(y, p, average="macro", zero_division=0)) < TOL
    np.testing.assert_allclose(quiet(fc.recall, t).values,
                               recall_score(y, p, labels=labels, average=None, zero_division=0), atol=TOL)
    np.testing.assert_allclose(quiet(fc.precision, t).values,
                               precision_score(y, p, labels=labels, average=None, zero_division=0),
                               atol=TOL)


@given(count_matrices())
def test_rk_is_pearson_correlation_of_centred_one_hot_matrices(counts):
    # Gorodkin (2004), eq. for R_K as a covariance ratio of the N x K indicator matrices X, Y;
    # after centring each column, it is the Pearson correlation of the flattened matrices
    # (scipy.stats.pearsonr), whose overall mean is then 0.
    truth, pred = expand_counts(counts)
    k = counts.shape[0]
    x = np.eye(k)[truth]
    y = np.eye(k)[pred]
    xc, yc = (x - x.mean(axis=0)).ravel(), (y - y.mean(axis=0)).ravel()
    assume(np.any(xc) and np.any(yc))
    t = fc.confusion_tensor(counts, list(range(k)))
    assert abs(float(fc.rk(t)) - pearsonr(xc, yc).statistic) < 1e-10


@given(count_matrices(max_k=2).filter(lambda c: c.shape == (2, 2)))
def test_binary_mcc_magnitude_is_root_chi2_over_n(counts):
    # |MCC| = sqrt(chi2 / n) for a 2x2 table: scipy.stats.chi2_contingency(correction=False).
    assume((counts.sum(axis=0) > 0).all() and (counts.sum(axis=1) > 0).all())
    chi2 = chi2_contingency(counts, correction=False).statistic
    mcc = float(fc.mcc(fc.confusion_tensor(counts, [0, 1])))
    assert abs(abs(mcc) - np.sqrt(chi2 / counts.sum())) < 1e-10


@given(count_matrices(max_k=2).filter(lambda c: c.shape == (2, 2)))
def test_mcc_squared_is_informedness_times_markedness(counts):
    # Powers (2011), "Evaluation: from precision, recall and F-measure to ROC, informedness,
    # markedness and correlation", J. Mach. Learn. Tech. 2(1): MCC^2 = informedness * markedness,
    # with MCC sharing their sign.
    assume((counts.sum(axis=0) > 0).all() and (counts.sum(axis=1) > 0).all())
    (tn, fp), (fn, tp) = counts
    informedness = tp / (tp + fn) + tn / (tn + fp) - 1
    markedness = tp / (tp + fp) + tn / (tn + fn) - 1
    mcc = float(fc.mcc(fc.confusion_tensor(counts, [0, 1])))
    assert abs(mcc**2 - informedness * markedness) < 1e-10
    assert informedness * markedness < 1e-12 or np.sign(mcc) == np.sign(informedness)


@given(count_matrices(), st.randoms(use_true_random=False))
def test_invariances(counts, random):
    # Properties of R_K (common practice): class relabelling, count scaling, swapping the roles of
    # truth and prediction leave it unchanged; it never leaves [-1, 1].
    k = counts.shape[0]
    t = fc.confusion_tensor(counts, list(range(k)))
    value = float(quiet(fc.rk, t))
    order = list(range(k))
    random.shuffle(order)
    permuted = fc.confusion_tensor(counts[np.ix_(order, order)], list(range(k)))
    assert abs(float(quiet(fc.rk, permuted)) - value) < TOL
    assert abs(float(quiet(fc.rk, fc.confusion_tensor(counts * 7, list(range(k))))) - value) < TOL
    assert abs(float(quiet(fc.rk, fc.confusion_tensor(counts.T, list(range(k))))) - value) < TOL
    assert -1.0 <= value <= 1.0


@given(count_matrices(max_k=8))
def test_decomposition_identities(counts):
    # Identities of docs/decomposition.md: sum of contributions is R_K; drags plus the marginal
    # mismatch term are 1 - R_K; the mismatch is >= 0 (Cauchy-Schwarz); weights are >= 0.
    t = fc.confusion_tensor(counts, list(range(counts.shape[0])))
    d = quiet(fc.decompose, t)
    rk = float(quiet(fc.rk, t))
    assert abs(float(d.contribution.sum()) - rk) < TOL
    assert abs(float(d.drag.sum() + d.marginal_mismatch) - (1 - rk)) < TOL
    assert float(d.marginal_mismatch) >= 0 and (d.weight >= 0).all()
    defined = d.weight > 0
    np.testing.assert_allclose(d.contribution.where(defined), (d.weight * d.mcc).where(defined),
                               atol=TOL)


def test_mismatch_is_zero_when_marginals_agree():
    # Cauchy-Schwarz holds with equality when a_k is proportional to b_k; equal margins suffice.
    d = fc.decompose(fc.confusion_tensor([[5, 2, 1], [1, 6, 1], [2, 0, 4]], ["a", "b", "c"]))
    assert abs(float(d.marginal_mismatch)) < TOL


def test_published_example_imbalanced_binary():
    # Chicco & Jurman (2020), BMC Genomics 21:6, use case "A1" (recalled from memory): 91 positives,
    # 9 negatives, TP = 90, FN = 1, TN = 0, FP = 9 gives accuracy 0.90, F1 0.95, MCC -0.03.
    t = fc.confusion_tensor([[0, 9], [1, 90]], ["neg", "pos"])
    assert round(float(fc.accuracy(t)), 2) == 0.90
    assert round(float(fc.f1(t).sel({"class": "pos"})), 2) == 0.95
    assert round(float(fc.mcc(t)), 2) == -0.03


@pytest.mark.parametrize("k", [3, 4, 7])
def test_minimum_of_rk_for_balanced_cyclic_errors(k):
    # Jurman, Riccadonna & Furlanello (2012): for K > 2 the minimum of R_K is above -1 and depends on
    # the class distribution; with balanced classes every one mistaken for the next, R_K = -1/(K-1)
    # (derived from Gorodkin's formula: c = 0, t_k = p_k = s/K).
    t = fc.confusion_tensor(np.roll(np.eye(k, dtype=int) * 10, 1, axis=1), list(range(k)))
    assert abs(float(fc.rk(t)) + 1 / (k - 1)) < TOL


def test_facts_of_the_trade():
    # Common practice: MCC is 1 on a diagonal matrix, -1 on an anti-diagonal 2x2, and 0 when
    # TP*TN = FP*FN.
    assert float(fc.rk(fc.confusion_tensor(np.diag([3, 5, 9]), [0, 1, 2]))) == 1.0
    assert float(fc.mcc(fc.confusion_tensor([[0, 4], [6, 0]], [0, 1]))) == -1.0
    assert abs(float(fc.mcc(fc.confusion_tensor([[2, 4], [3, 6]], [0, 1])))) < TOL


def test_large_counts_do_not_overflow():
    # s^2 for s ~ 4e10 exceeds int64; float64 sums keep R_K equal to the small-count value.
    base = np.array([[40, 3, 1], [5, 30, 2], [0, 4, 20]])
    small = float(fc.rk(fc.confusion_tensor(base, [0, 1, 2])))
    big = fc.confusion_tensor(base * 400_000_000, [0, 1, 2])
    assert int(big.sum()) > 2**35
    assert abs(float(fc.rk(big)) - small) < TOL
    assert abs(float(fc.cohen_kappa(big)) - float(fc.cohen_kappa(fc.confusion_tensor(base, [0, 1, 2])))) < TOL
    d = fc.decompose(big)
    assert abs(float(d.contribution.sum()) - small) < TOL


def test_metrics_broadcast_over_leading_dims_and_keep_coords():
    counts = np.array([[[3, 1], [0, 2]], [[1, 1], [1, 1]]])
    t = xr.DataArray(counts, dims=("model", "actual", "predicted"),
                     coords={"model": ["old", "new"], "actual": [0, 1], "predicted": [0, 1]})
    out = fc.rk(t)
    assert out.dims == ("model",) and out.coords["model"].values.tolist() == ["old", "new"]
    assert fc.ovr_mcc(t).dims == ("model", "class")
    # R_K = 0 on [[1, 1], [1, 1]]: predictions independent of the truth (common practice;
    # Gorodkin's numerator c s - sum t_k p_k = 2 * 4 - (2 * 2 + 2 * 2) = 0), and what
    # sklearn.metrics.matthews_corrcoef gives on those four samples.
    assert matthews_corrcoef([0, 0, 1, 1], [0, 1, 0, 1]) == 0.0
    assert abs(float(out.sel(model="new"))) < TOL
    assert abs(float(out.sel(model="old")) - matthews_corrcoef([0, 0, 0, 0, 1, 1],
                                                               [0, 0, 0, 1, 1, 1])) < TOL


def test_undefined_follows_convention_and_warns_where():
    t = fc.tally(["a", "a", "b", "b"], ["a", "a", "a", "a"], folds=[1, 1, 2, 2])
    with pytest.warns(UndefinedMetricWarning, match=r"R_K is undefined \(0/0\) at fold=1; fold=2"):
        zero = fc.rk(t)
    assert zero.values.tolist() == [0.0, 0.0]
    with pytest.warns(UndefinedMetricWarning, match="reported as NaN"):
        assert np.isnan(fc.rk(t, undefined="nan")).all()
    with pytest.warns(UndefinedMetricWarning, match=r"one-vs-rest MCC .* fold=1 class='a'"):
        fc.ovr_mcc(t)


def test_undefined_choice_is_checked():
    with pytest.raises(fc.OptionError, match=r"`undefined` must be one of 'zero', 'nan'; got 'none'"):
        fc.rk(fc.confusion_tensor([[1]], ["a"]), undefined="none")


def test_top_confusion_picks_largest_off_diagonal_cell():
    t = fc.confusion_tensor([[5, 1, 3], [0, 4, 0], [2, 2, 1]], ["a", "b", "c"])
    top = fc.top_confusion(t)
    assert top.top_confusion.values[[0, 2]].tolist() == ["c", "a"]  # tie 2-2 goes to the first
    assert top.top_confusion_count.values.tolist() == [3, 0, 2]

"""The Evaluation object: pooled and per-fold figures, warnings."""

import numpy as np
import pytest
from sklearn.metrics import matthews_corrcoef

import foldcorr as fc
from foldcorr.evaluation import FoldSummary


def test_pooled_and_per_fold_figures_match_reference():
    # Reference: sklearn.metrics.matthews_corrcoef on the pooled samples and on each fold.
    rng = np.random.default_rng(3)
    y = rng.integers(0, 4, 400)
    p = np.where(rng.random(400) < 0.7, y, rng.integers(0, 4, 400))
    folds = rng.integers(0, 5, 400)
    ev = fc.evaluate(fc.tally(y, p, folds=folds))
    assert abs(ev.rk - matthews_corrcoef(y, p)) < 1e-12
    per_fold = [matthews_corrcoef(y[folds == f], p[folds == f]) for f in range(5)]
    np.testing.assert_allclose(ev.folds["rk"].values, per_fold, atol=1e-12)
    assert ev.fold_summary.count == 5
    assert abs(ev.fold_summary.mean_rk - np.mean(per_fold)) < 1e-12
    assert abs(ev.fold_summary.sd_rk - np.std(per_fold, ddof=1)) < 1e-12
    assert ev.n == 400 and ev.folds["n"].values.sum() == 400


def test_per_class_table_is_complete_and_sorted_by_drag():
    counts = np.array([[50, 5, 0], [20, 10, 0], [0, 0, 15]])
    classes = ["a", "b", "c"]
    ev = fc.evaluate(fc.confusion_tensor(counts, classes))
    table = ev.by_drag()
    # Expected order from outside the package: one-vs-rest MCC from
    # sklearn.metrics.matthews_corrcoef on the samples, and the drag w_k (1 - MCC_k) with
    # w_k = sqrt(a_k b_k) / sqrt(sum a * sum b), a_k = p_k (s - p_k), b_k = t_k (s - t_k)
    # (the decomposition of Gorodkin's R_K, docs/decomposition.md).
    rows, cols = np.nonzero(counts)
    y = np.repeat(rows, counts[rows, cols])
    p = np.repeat(cols, counts[rows, cols])
    mcc = np.array([matthews_corrcoef(y == k, p == k) for k in range(3)])
    s, t_k, p_k = counts.sum(), counts.sum(axis=1), counts.sum(axis=0)
    a, b = p_k * (s - p_k), t_k * (s - t_k)
    weight = np.sqrt(a * b) / np.sqrt(a.sum() * b.sum())
    drag = weight * (1 - mcc)
    expected = [classes[k] for k in np.argsort(-drag, kind="stable")]
    assert table.coords["class"].values.tolist() == expected
    np.testing.assert_allclose(table["drag"].values, np.sort(drag)[::-1], atol=1e-12)
    np.testing.assert_allclose(ev.per_class["mcc"].values, mcc, atol=1e-12)
    assert set(ev.per_class.data_vars) >= {"in_truth", "predicted", "mcc", "weight", "contribution",
                                           "drag", "recall", "precision", "f1", "top_confusion"}
    assert ev.per_class["in_truth"].values.tolist() == [55, 30, 15]


def test_every_undefined_value_is_named_in_warnings():
    # Fold 2 has a single class in truth and predictions: R_K is 0/0 there.
    t = fc.tally(["a", "b", "a", "a"], ["a", "b", "a", "a"], folds=[1, 1, 2, 2])
    ev = fc.evaluate(t)
    assert any("per fold: R_K is undefined (0/0) at fold=2" in w for w in ev.warnings)
    assert ev.folds["rk"].sel(fold=2).item() == 0.0
    ev_nan = fc.evaluate(t, undefined="nan")
    assert np.isnan(ev_nan.folds["rk"].sel(fold=2).item())


def test_accuracy_hiding_a_weak_correlation_is_warned():
    # Reference: sklearn.metrics.accuracy_score and matthews_corrcoef on the samples of a
    # 1000:100 problem where the rare class is found 5 times (accuracy 0.914, MCC 0.214).
    from sklearn.metrics import accuracy_score

    y = np.array([0] * 1000 + [1] * 100)
    p = np.array([0] * 1000 + [0] * 95 + [1] * 5)
    ev = fc.evaluate(fc.tally(y, p))
    acc, mcc = accuracy_score(y, p), matthews_corrcoef(y, p)
    assert abs(ev.figure("accuracy") - acc) < 1e-12 and abs(ev.rk - mcc) < 1e-12
    assert any(f"accuracy is {acc:.3f} but R_K is only {mcc:.3f}" in w for w in ev.warnings)


@pytest.mark.parametrize("counts", [[[10]], [[1000, 0], [100, 0]], [[1000, 100], [0, 0]]])
def test_undefined_rk_gets_no_accuracy_warning(counts):
    # R_K is 0/0 when truth or predictions fall in one class (Gorodkin 2004, the denominator
    # sqrt((s^2 - sum p_k^2)(s^2 - sum t_k^2)) is 0): the undefined warning says so, and
    # "R_K is only 0.000" beside a high accuracy would read as a measured 0.
    classes = ["common", "rare"][: len(counts)]
    ev = fc.evaluate(fc.confusion_tensor(counts, classes))
    assert ev.figure("accuracy") >= 0.9
    assert any("R_K is undefined (0/0)" in w for w in ev.warnings)
    assert not any("but R_K is only" in w for w in ev.warnings)


def test_sample_counts_do_not_overflow():
    # Exact Python integers as the reference: a cell of 2**63 - 1 plus a few more samples
    # exceeds int64, which wrapped n around to a negative number.
    big = 2**63 - 1
    t = fc.confusion_tensor([[[big, 3], [2, 5]], [[0, 1], [1, 1]]], ["a", "b"],
                            leading={"fold": [1, 2]})
    ev = fc.evaluate(t)
    assert ev.n > 0 and ev.n == pytest.approx(big + 3 + 2 + 5 + 3, rel=1e-15)
    np.testing.assert_allclose(ev.folds["n"].values, [big + 10, 3], rtol=1e-15)
    np.testing.assert_allclose(ev.per_class["in_truth"].values, [big + 3 + 1, 2 + 5 + 2],
                               rtol=1e-15)
    np.testing.assert_allclose(ev.per_class["predicted"].values, [big + 2 + 1, 3 + 5 + 2],
                               rtol=1e-15)
    # Ordinary counts stay exact integers.
    small = fc.evaluate(fc.confusion_tensor([[5, 1], [2, 7]], ["a", "b"]))
    assert small.n == 15 and isinstance(small.n, int)
    assert small.per_class["in_truth"].dtype == np.int64


def test_evaluate_refuses_other_leading_dims():
    import xarray as xr

    t = xr.DataArray(np.ones((2, 2, 2), int), dims=("model", "actual", "predicted"))
    with pytest.raises(fc.InvalidTensorError, match=r"select or pool \['model'\] first"):
        fc.evaluate(t)


def test_fold_summary_of_one_fold_has_no_spread():
    s = FoldSummary.of(np.array([0.4]))
    assert s.count == 1 and np.isnan(s.sd_rk) and s.min_rk == s.max_rk == 0.4


def test_with_extra_merges_warnings():
    class Section:
        warnings = ("something to know",)

    ev = fc.evaluate(fc.confusion_tensor([[5, 1], [1, 5]], ["x", "y"])).with_extra("s", Section())
    assert "s" in ev.extras and ev.warnings[-1] == "something to know"


def test_a_tensor_without_classes_is_refused_at_validation():
    # K = 0: no metric is defined and nothing can be reported; refused with one clear message
    # by the boundary validator, not a numpy error from deep inside (common practice).
    import xarray as xr

    empty = xr.DataArray(np.zeros((0, 0), int), dims=("actual", "predicted"))
    for run in (fc.evaluate, fc.rk, fc.top_confusion, fc.decompose):
        with pytest.raises(fc.InvalidTensorError, match="needs at least one class"):
            run(empty)
    with pytest.raises(fc.InvalidTensorError, match="needs at least one class"):
        fc.tally([], [])

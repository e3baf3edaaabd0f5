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
    t = fc.confusion_tensor([[50, 5, 0], [20, 10, 0], [0, 0, 15]], ["a", "b", "c"])
    ev = fc.evaluate(t)
    table = ev.by_drag()
    # Class a: weight 0.437, MCC 0.504 -> drag 0.217 just above b's 0.314 * (1 - 0.336) = 0.208.
    assert table.coords["class"].values.tolist() == ["a", "b", "c"]
    assert np.all(np.diff(table["drag"].values) <= 0)
    assert set(ev.per_class.data_vars) >= {"support", "predicted", "mcc", "weight", "contribution",
                                           "drag", "recall", "precision", "f1", "top_confusion"}
    assert ev.per_class["support"].values.tolist() == [55, 30, 15]


def test_every_undefined_value_is_named_in_warnings():
    # Fold 2 has a single class in truth and predictions: R_K is 0/0 there.
    t = fc.tally(["a", "b", "a", "a"], ["a", "b", "a", "a"], folds=[1, 1, 2, 2])
    ev = fc.evaluate(t)
    assert any("per fold: R_K is undefined (0/0) at fold=2" in w for w in ev.warnings)
    assert ev.folds["rk"].sel(fold=2).item() == 0.0
    ev_nan = fc.evaluate(t, undefined="nan")
    assert np.isnan(ev_nan.folds["rk"].sel(fold=2).item())


def test_accuracy_hiding_a_weak_correlation_is_warned():
    # Common practice: the majority-class predictor on 10:1 data has accuracy 10/11 and MCC 0.
    ev = fc.evaluate(fc.confusion_tensor([[1000, 0], [100, 0]], ["common", "rare"]))
    assert abs(ev.figure("accuracy") - 10 / 11) < 1e-12 and ev.rk == 0.0
    assert any("accuracy is 0.909 but R_K is only 0.000" in w for w in ev.warnings)


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

"""Tests of foldcorr.analysis.crossval against scikit-learn's own cross-validation."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.datasets import load_iris, load_wine
from sklearn.metrics import confusion_matrix, make_scorer, matthews_corrcoef
from sklearn.model_selection import (
    GridSearchCV,
    GroupKFold,
    KFold,
    cross_val_predict,
    cross_validate,
)
from sklearn.neighbors import KNeighborsClassifier
from sklearn.tree import DecisionTreeClassifier

import foldcorr as fc
from foldcorr.metrics import rk


def test_rk_scorer_in_cross_validate_equals_matthews_corrcoef_per_fold():
    # reference: sklearn.metrics.matthews_corrcoef wrapped by make_scorer, same splits
    X, y = load_wine(return_X_y=True)
    cv = KFold(5, shuffle=True, random_state=0)
    out = cross_validate(KNeighborsClassifier(), X, y, cv=cv,
                         scoring={"rk": fc.rk_scorer, "mcc": make_scorer(matthews_corrcoef)})
    np.testing.assert_allclose(out["test_rk"], out["test_mcc"], rtol=0, atol=1e-12)


def test_rk_scorer_drives_grid_search():
    X, y = load_iris(return_X_y=True)
    grid = GridSearchCV(KNeighborsClassifier(), {"n_neighbors": [1, 15]}, cv=3,
                        scoring=fc.rk_scorer).fit(X, y)
    ref = GridSearchCV(KNeighborsClassifier(), {"n_neighbors": [1, 15]}, cv=3,
                       scoring=make_scorer(matthews_corrcoef)).fit(X, y)
    np.testing.assert_allclose(grid.cv_results_["mean_test_score"],
                               ref.cv_results_["mean_test_score"], atol=1e-12)


def test_cross_tally_matches_cross_val_predict_and_per_fold_scores():
    X, y = load_wine(return_X_y=True)
    cv = KFold(4, shuffle=True, random_state=1)
    est = DecisionTreeClassifier(random_state=0)
    t = fc.cross_tally(est, X, y, cv=cv)
    assert t.dims == ("fold", "actual", "predicted") and t.sizes["fold"] == 4
    pooled = confusion_matrix(y, cross_val_predict(est, X, y, cv=cv))  # sklearn
    np.testing.assert_array_equal(t.sum("fold").values, pooled)
    per_fold = cross_validate(est, X, y, cv=cv, scoring=make_scorer(matthews_corrcoef))
    np.testing.assert_allclose(rk(t).values, per_fold["test_score"], atol=1e-12)


def test_cross_tally_with_groups_and_strings():
    X, y = load_iris(return_X_y=True)
    names = np.array(["setosa", "versicolor", "virginica"])[y]
    groups = np.arange(len(y)) % 6
    t = fc.cross_tally(KNeighborsClassifier(), X, names, cv=GroupKFold(3),
                       groups=groups)
    assert t.coords["actual"].values.tolist() == ["setosa", "versicolor", "virginica"]
    assert int(t.sum()) == 150 and t.attrs["cv"] == "GroupKFold"
    # each fold holds exactly the samples of its two test groups
    assert sorted(t.sum(("actual", "predicted")).values.tolist()) == [50, 50, 50]


def test_cross_tally_feeds_fold_statistics_and_bootstrap():
    X, y = load_iris(return_X_y=True)
    t = fc.cross_tally(KNeighborsClassifier(), X, y, cv=5)
    fs = fc.fold_statistics(t)
    assert fs.count == 5 and fs.test_train_ratio == pytest.approx(0.25)
    res = fc.bootstrap(t, n_resamples=200, seed=0)
    assert float(res.low) <= float(res.estimate) <= float(res.high)


def test_rk_score_with_sample_weight_equals_matthews_corrcoef():
    # reference: sklearn.metrics.matthews_corrcoef with sample_weight
    rng = np.random.default_rng(0)
    y, p = rng.integers(0, 3, 200), rng.integers(0, 3, 200)
    w = rng.uniform(0, 2, 200)
    assert fc.rk_score(y, p, sample_weight=w) == pytest.approx(
        matthews_corrcoef(y, p, sample_weight=w), abs=1e-12)


def test_cross_tally_passes_n_jobs_and_fit_params_and_returns_predictions():
    # reference: sklearn.model_selection.cross_val_predict with the same params
    X, y = load_wine(return_X_y=True)
    cv = KFold(3, shuffle=True, random_state=0)
    w = np.where(y == 0, 3.0, 1.0)
    est = DecisionTreeClassifier(random_state=0)
    t, pred = fc.cross_tally(est, X, y, cv=cv, n_jobs=2, params={"sample_weight": w},
                             return_predictions=True)
    ref = cross_val_predict(est, X, y, cv=cv, params={"sample_weight": w})
    np.testing.assert_array_equal(pred, ref)
    np.testing.assert_array_equal(t.sum("fold").values, confusion_matrix(y, ref))


def test_cross_tally_refuses_splits_that_do_not_test_every_sample_once():
    from sklearn.model_selection import TimeSeriesSplit

    X, y = load_iris(return_X_y=True)
    with pytest.raises(ValueError, match="`cv` must split"):
        fc.cross_tally(KNeighborsClassifier(), X, y, cv=TimeSeriesSplit(3))


def _wine_models():
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    return {"logistic": make_pipeline(StandardScaler(), LogisticRegression(max_iter=500)),
            "tree": DecisionTreeClassifier(random_state=0),
            "knn": KNeighborsClassifier()}


def test_compare_estimators_rk_equals_matthews_corrcoef_of_cross_val_predict():
    # reference: sklearn.metrics.matthews_corrcoef of sklearn's cross_val_predict output,
    # pooled and per fold, on the same splits
    X, y = load_wine(return_X_y=True)
    cv = KFold(4, shuffle=True, random_state=2)
    models = _wine_models()
    res = fc.compare_estimators(models, X, y, cv=cv, n_resamples=200, seed=0)
    preds = {m: cross_val_predict(e, X, y, cv=cv) for m, e in models.items()}
    mcc = {m: matthews_corrcoef(y, p) for m, p in preds.items()}
    ranked = res.ranking["model"].values.tolist()
    assert ranked == sorted(mcc, key=lambda m: -mcc[m]) and res.best == ranked[0]
    for m in models:
        assert float(res.ranking["rk"].sel(model=m)) == pytest.approx(mcc[m], abs=1e-12)
        assert float(res.ranking["gap"].sel(model=m)) == pytest.approx(
            mcc[res.best] - mcc[m], abs=1e-12)
        per_fold = [matthews_corrcoef(y[test], preds[m][test]) for _, test in cv.split(X)]
        np.testing.assert_allclose(res.per_fold.sel(model=m).values, per_fold, atol=1e-12)


def test_compare_estimators_with_an_int_cv_uses_stratified_folds():
    # reference: cross_val_predict with the same int cv (StratifiedKFold for classifiers)
    X, y = load_iris(return_X_y=True)
    models = {"knn": KNeighborsClassifier(),
              "shallow": DecisionTreeClassifier(max_depth=2, random_state=0)}
    res = fc.compare_estimators(models, X, y, cv=5, n_resamples=200, seed=0)
    for m, e in models.items():
        assert float(res.ranking["rk"].sel(model=m)) == pytest.approx(
            matthews_corrcoef(y, cross_val_predict(e, X, y, cv=5)), abs=1e-12)
    assert res.per_fold.sizes["fold"] == 5 and res.n == 150


def test_compare_estimators_fits_every_model_on_the_same_splits():
    # identity: two copies of one deterministic estimator on the same splits predict the same
    # labels, so their gap is exactly 0; an unseeded shuffled KFold redrawn per model would not
    X, y = load_wine(return_X_y=True)
    est = DecisionTreeClassifier(random_state=0)
    res = fc.compare_estimators({"a": est, "b": est}, X, y, cv=KFold(5, shuffle=True),
                                n_resamples=200, seed=0)
    assert float(res.ranking["gap"].sel(model=res.tied[-1])) == 0.0
    assert res.tied == ("a", "b")


def test_compare_estimators_with_groups_and_clusters():
    X, y = load_iris(return_X_y=True)
    groups = np.arange(len(y)) % 10
    res = fc.compare_estimators({"knn": KNeighborsClassifier(),
                                 "shallow": DecisionTreeClassifier(max_depth=2,
                                                                   random_state=0)},
                                X, y, cv=GroupKFold(5), groups=groups, cluster=groups,
                                n_resamples=200, seed=0)
    assert res.n_clusters == 10 and res.per_fold.sizes["fold"] == 5


def test_compare_estimators_refuses_fewer_than_two_estimators():
    X, y = load_iris(return_X_y=True)
    with pytest.raises(fc.InvalidInputError, match="`estimators` must map at least two"):
        fc.compare_estimators({"knn": KNeighborsClassifier()}, X, y)
    with pytest.raises(fc.OptionError, match="`cv` must split"):
        from sklearn.model_selection import TimeSeriesSplit

        fc.compare_estimators(_wine_models(), X, y, cv=TimeSeriesSplit(3))

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

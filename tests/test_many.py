"""Many models on the same samples: ranking, comparisons with the best, class winners.

References: sklearn.metrics.matthews_corrcoef for every R_K (scikit-learn classifiers on
the bundled digits data, 5-fold cross_val_predict), statsmodels' multipletests(method="holm")
for the adjustment, and compare_models (checked against its own references in
test_compare.py) for two models.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.datasets import load_digits
from sklearn.metrics import matthews_corrcoef
from sklearn.model_selection import StratifiedKFold, cross_val_predict
from sklearn.naive_bayes import GaussianNB
from sklearn.neighbors import KNeighborsClassifier
from sklearn.tree import DecisionTreeClassifier
from statsmodels.stats.multitest import multipletests

import foldcorr as fc
from foldcorr.errors import InvalidInputError


@pytest.fixture(scope="module")
def digits_models():
    X, y = load_digits(return_X_y=True)
    cv = StratifiedKFold(5, shuffle=True, random_state=0)
    folds = np.empty(len(y), dtype=int)
    for f, (_, test) in enumerate(cv.split(X, y)):
        folds[test] = f
    models = {
        "knn": KNeighborsClassifier(3),
        "knn15": KNeighborsClassifier(15),
        "bayes": GaussianNB(),
        "tree": DecisionTreeClassifier(random_state=0),
    }
    preds = {name: cross_val_predict(m, X, y, cv=cv) for name, m in models.items()}
    return y, preds, folds


def test_rk_of_every_model_equals_sklearn_on_digits(digits_models):
    y, preds, folds = digits_models
    res = fc.compare_many(y, preds, folds=folds, n_resamples=100, n_permutations=300, seed=0)
    for name, p in preds.items():
        # reference: sklearn.metrics.matthews_corrcoef (multiclass = R_K)
        assert float(res.ranking["rk"].sel(model=name)) == pytest.approx(
            matthews_corrcoef(y, p), abs=1e-12)
        for f in range(5):
            assert float(res.per_fold.sel(model=name, fold=f)) == pytest.approx(
                matthews_corrcoef(y[folds == f], p[folds == f]), abs=1e-12)
    assert res.ranking["rk"].values.tolist() == sorted(res.ranking["rk"].values, reverse=True)
    assert res.best in ("knn", "knn15") and res.ranking["model"].values[-1] in ("tree", "bayes")
    assert bool(res.ranking["separated"].sel(model="tree"))
    assert (res.ranking["low"] < res.ranking["rk"]).all()
    assert res.per_class["mcc"].dims == ("model", "class")
    assert set(res.per_class["winner"].values) <= set(preds)
    assert "holm" in repr(res) and len(repr(res)) < 200


def test_holm_equals_statsmodels():
    rng = np.random.default_rng(0)
    for m in (1, 2, 5, 17):
        p = rng.random(m) ** 2
        p[0] = p[-1]  # a tie
        # reference: statsmodels.stats.multitest.multipletests(method="holm")
        expected = multipletests(p, method="holm")[1]
        assert np.allclose(fc.holm(p), expected, atol=1e-15)
        # a larger family: the untested hypotheses enter as p = 1
        padded = np.concatenate([p, np.ones(2 * m)])
        assert np.allclose(fc.holm(p, family=3 * m),
                           multipletests(padded, method="holm")[1][:m], atol=1e-15)


def test_the_adjusted_p_values_in_the_result_are_holm_of_the_raw_ones(digits_models):
    y, preds, folds = digits_models
    res = fc.compare_many(y, preds, folds=folds, n_resamples=100, n_permutations=200, seed=1)
    raw = res.ranking["p_value"].values[1:]
    # reference: statsmodels.stats.multitest.multipletests(method="holm") over all 6 pairs of
    # the 4 models, the 3 pairs not compared with the best entering as p = 1
    family = np.concatenate([raw, np.ones(3)])
    assert np.allclose(res.ranking["p_adjusted"].values[1:],
                       multipletests(family, method="holm")[1][:3])
    assert res.adjustment.startswith("holm")


def test_two_models_give_the_numbers_of_compare_models():
    rng = np.random.default_rng(4)
    truth = rng.integers(0, 4, 500)
    a = np.where(rng.random(500) < 0.6, truth, rng.integers(0, 4, 500))
    b = np.where(rng.random(500) < 0.7, truth, rng.integers(0, 4, 500))
    folds = rng.integers(0, 3, 500)
    res = fc.compare_many(truth, {"a": a, "b": b}, folds=folds, n_resamples=300,
                          n_permutations=250, seed=7)
    ref = fc.compare_models(fc.joint_tally(truth, a, b, folds=folds), n_resamples=300,
                            n_permutations=250, seed=7)
    assert res.best == "b"
    row = res.ranking.sel(model="a")
    assert float(row["gap"]) == ref.difference
    assert (float(row["gap_low"]), float(row["gap_high"])) == ref.ci
    assert float(row["p_value"]) == ref.p_value == float(row["p_adjusted"])


def test_clustered_many_models():
    rng = np.random.default_rng(5)
    site = np.repeat(np.arange(30), 10)
    truth = rng.integers(0, 3, 300)
    hard = rng.random(30)[site] < 0.4
    preds = {name: np.where(~hard & (rng.random(300) < acc), truth, (truth + 1) % 3)
             for name, acc in (("x", 0.9), ("y", 0.8), ("z", 0.5))}
    res = fc.compare_many(truth, preds, cluster=site, n_resamples=200, seed=0)
    assert res.n_clusters == 30 and (res.ranking["design_effect"] > 1).all()
    flat = fc.compare_many(truth, preds, n_resamples=200, seed=0)
    wide = (res.ranking["high"] - res.ranking["low"]).values
    narrow = (flat.ranking["high"] - flat.ranking["low"]).values
    assert (wide > narrow).all()


def test_refusals():
    with pytest.raises(InvalidInputError, match="at least two model names"):
        fc.compare_many([0, 1], {"a": [0, 1]})
    with pytest.raises(InvalidInputError, match="model 'b' have 1 values"):
        fc.compare_many([0, 1], {"a": [0, 1], "b": [0]})


def test_too_few_permutations_to_separate_anything_is_said():
    rng = np.random.default_rng(2)
    truth = rng.integers(0, 3, 200)
    preds = {f"m{i}": np.where(rng.random(200) < 0.3 + 0.15 * i, truth, (truth + 1) % 3)
             for i in range(5)}
    res = fc.compare_many(truth, preds, n_resamples=100, n_permutations=150, seed=0)
    assert any("no model can be separated" in w for w in res.warnings)
    assert not res.ranking["separated"].any()

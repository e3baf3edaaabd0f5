"""Sparse cells: every figure equals the dense path and outside references; refusals."""

import re
import warnings

import numpy as np
import pytest
import sparse
import xarray as xr
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sklearn.metrics import (accuracy_score, balanced_accuracy_score, cohen_kappa_score,
                             confusion_matrix, matthews_corrcoef,
                             precision_recall_fscore_support)

import foldcorr as fc
from foldcorr.errors import FoldcorrError, TensorTooLargeError, UndefinedMetricWarning
from foldcorr.figures import compute_figures
from foldcorr.figures import MULTICLASS, SCOPES, figures_of
from foldcorr.tensor import (as_dense, cell_sums, check_dense_size, confusion_tensor,
                             count_codes, is_sparse, pool, sum_cells, tally, tally_columns,
                             top_off_diagonal, validate_tensor)

from strategies import label_arrays


def _sparse(t):
    return t.copy(data=sparse.COO.from_numpy(t.values))


def _tally_sparse(truth, pred, folds=None, weights=None):
    leading = None if folds is None else {"fold": folds}
    t = tally_columns({"actual": ("truth", truth), "predicted": ("pred", pred)},
                      leading=leading, weights=weights, sparse_above=0)
    return validate_tensor(t)


def _assert_same(a: xr.Dataset, b: xr.Dataset):
    assert set(a.data_vars) == set(b.data_vars)
    for name in a.data_vars:
        x, y = a[name].values, b[name].values
        if x.dtype == object:
            assert x.tolist() == y.tolist(), name
        else:
            np.testing.assert_allclose(x, y, rtol=1e-12, atol=1e-12, err_msg=name)


def _all_figures(t):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        out = {}
        for scope in SCOPES:
            figures = figures_of(MULTICLASS, scope)
            if figures and (scope != "fold" or "fold" in t.dims):
                out[scope] = compute_figures(figures, t if scope == "fold" else pool(t))
        return out


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(label_arrays(folds=True), st.sampled_from(["zero", "nan"]))
def test_sparse_tally_gives_the_dense_counts_and_every_figure(data, undefined):
    # Label arrays with classes only predicted (empty rows), only actual (empty
    # columns), single-class folds and K = 1 or 2 (tests/strategies.py).
    dense = tally(data["truth"], data["pred"], folds=data["folds"])
    sp = _tally_sparse(data["truth"], data["pred"], data["folds"])
    assert is_sparse(sp) and not is_sparse(dense)
    np.testing.assert_array_equal(as_dense(sp).values, dense.values)
    assert sp.coords["actual"].values.tolist() == dense.coords["actual"].values.tolist()
    assert sp.coords["fold"].values.tolist() == dense.coords["fold"].values.tolist()
    got, want = _all_figures(sp), _all_figures(dense)
    for scope in want:
        _assert_same(got[scope], want[scope])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        a, b = fc.evaluate(sp, undefined=undefined), fc.evaluate(dense, undefined=undefined)
    assert a.warnings == b.warnings
    _assert_same(a.pooled, b.pooled)
    _assert_same(a.per_class, b.per_class)


@settings(max_examples=60, deadline=None)
@given(label_arrays(weights=True))
def test_weighted_sparse_tally_equals_dense(data):
    dense = tally(data["truth"], data["pred"], weights=data["weights"])
    sp = _tally_sparse(data["truth"], data["pred"], weights=data["weights"])
    assert sp.dtype == np.float64
    np.testing.assert_allclose(as_dense(sp).values, dense.values, rtol=1e-12)


@settings(max_examples=60, deadline=None)
@given(label_arrays(max_classes=5))
def test_sparse_figures_match_scikit_learn(data):
    truth, pred = data["truth"], data["pred"]
    t = _tally_sparse(truth, pred)
    classes = t.coords["actual"].values.tolist()
    # scikit-learn: confusion_matrix (rows actual, columns predicted) and
    # matthews_corrcoef (Gorodkin's R_K for K > 2).
    np.testing.assert_array_equal(as_dense(t).values,
                                  confusion_matrix(truth, pred, labels=classes))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        want = matthews_corrcoef(truth, pred)
        got = float(fc.rk(t))
    assert got == pytest.approx(want, abs=1e-12)
    # scikit-learn's accuracy, balanced accuracy, kappa and per-class precision,
    # recall and F1 (zero_division=0 is undefined="zero").
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert float(fc.metrics.accuracy(t)) == pytest.approx(accuracy_score(truth, pred))
        assert float(fc.metrics.balanced_accuracy(t)) == pytest.approx(
            balanced_accuracy_score(truth, pred))
        if len(classes) > 1:
            assert float(fc.metrics.cohen_kappa(t)) == pytest.approx(
                cohen_kappa_score(truth, pred, labels=classes), abs=1e-12)
        p, r, f, support = precision_recall_fscore_support(truth, pred, labels=classes,
                                                           zero_division=0)
        np.testing.assert_allclose(fc.metrics.precision(t).values, p, atol=1e-12)
        np.testing.assert_allclose(fc.metrics.recall(t).values, r, atol=1e-12)
        np.testing.assert_allclose(fc.metrics.f1(t).values, f, atol=1e-12)
        np.testing.assert_array_equal(fc.metrics.support(t).values, support)


def test_two_classes_sparse_mcc_equals_scikit_learn():
    truth = np.array([0, 0, 0, 1, 1, 1, 1, 0, 1, 1])
    pred = np.array([0, 1, 0, 1, 1, 0, 1, 0, 1, 1])
    t = _sparse(tally(truth, pred))
    assert float(fc.mcc(t)) == pytest.approx(matthews_corrcoef(truth, pred), abs=1e-12)


def test_rk_at_twenty_thousand_classes_equals_the_formula_on_label_codes():
    # Gorodkin (2004), eq. 8 written from the label codes: c = sum_k C_kk,
    # s = N, t_k and p_k the class counts of truth and predictions;
    # R_K = (c s - sum t_k p_k) / sqrt((s^2 - sum p_k^2)(s^2 - sum t_k^2)).
    k, n = 20_000, 300_000
    rng = np.random.default_rng(7)
    truth = rng.integers(0, k, n)
    pred = np.where(rng.random(n) < 0.6, truth, rng.integers(0, k, n))
    folds = rng.integers(0, 5, n)
    t = tally(truth, pred, folds=folds)
    assert is_sparse(t)
    tk = np.bincount(truth, minlength=k).astype(float)
    pk = np.bincount(pred, minlength=k).astype(float)
    c, s = float((truth == pred).sum()), float(n)
    want = (c * s - tk @ pk) / np.sqrt((s * s - pk @ pk) * (s * s - tk @ tk))
    assert float(fc.rk(pool(t))) == pytest.approx(want, rel=1e-12)
    for f in range(5):
        m = folds == f
        tk = np.bincount(truth[m], minlength=k).astype(float)
        pk = np.bincount(pred[m], minlength=k).astype(float)
        c, s = float((truth[m] == pred[m]).sum()), float(m.sum())
        want = (c * s - tk @ pk) / np.sqrt((s * s - pk @ pk) * (s * s - tk @ tk))
        assert float(fc.rk(t.sel(fold=f))) == pytest.approx(want, rel=1e-12)
    ev = fc.evaluate(t)
    assert ev.per_class.sizes["class"] == len(t.coords["actual"])
    assert ev.rk == pytest.approx(float(fc.rk(pool(t))), rel=1e-12)


def test_sums_and_top_confusion_agree_between_backings():
    t = confusion_tensor([[[4, 2, 2], [0, 3, 0], [1, 0, 5]],
                          [[0, 0, 0], [7, 0, 1], [0, 0, 0]]], ["a", "b", "c"],
                         leading={"fold": [1, 2]})
    s = _sparse(t)
    for x, y in zip(cell_sums(s), cell_sums(t)):
        np.testing.assert_array_equal(x, y)
    for x, y in zip(top_off_diagonal(s), top_off_diagonal(t)):
        np.testing.assert_array_equal(x, y)
    np.testing.assert_array_equal(as_dense(pool(s)).values, pool(t).values)
    assert is_sparse(pool(s))
    np.testing.assert_array_equal(sum_cells(s, ["fold", "actual"], dense=True).values,
                                  t.values.sum(axis=(0, 1)))


def test_validate_tensor_checks_sparse_counts():
    t = confusion_tensor([[3, 0], [1, 2]], ["a", "b"])
    bad = t.copy(data=sparse.COO.from_numpy(np.array([[3, 0], [-1, 2]])))
    with pytest.raises(fc.InvalidTensorError, match="found -1 at actual='b', predicted='a'"):
        validate_tensor(bad)
    nan = t.copy(data=sparse.COO.from_numpy(np.array([[3.0, 0.0], [np.inf, 2.0]])))
    with pytest.raises(fc.InvalidTensorError, match="finite; found inf at actual='b'"):
        validate_tensor(nan)
    ok = validate_tensor(t.copy(data=sparse.COO.from_numpy(np.array([[3, 0], [1, 2]],
                                                                    dtype=np.int32))))
    assert is_sparse(ok) and ok.dtype == np.int64


def test_a_dense_tensor_too_large_for_memory_is_refused_before_allocating():
    huge = xr.DataArray(sparse.COO(np.array([[0], [1]]), np.array([5]), shape=(10**6, 10**6)),
                        dims=("actual", "predicted"), name="count")
    t = validate_tensor(huge)
    with pytest.warns(UndefinedMetricWarning):  # one class in truth, another predicted
        assert float(fc.rk(t)) == 0.0  # figures come from the nonzero cells alone
    with pytest.raises(TensorTooLargeError, match=r"shape \(1000000, 1000000\) needs 7.3 TiB"):
        as_dense(t)
    with pytest.raises(MemoryError):
        count_codes([np.array([0]), np.array([1])], [10**6, 10**6])
    with pytest.raises(FoldcorrError, match="keep the counts sparse"):
        check_dense_size((5, 10**6, 10**6), np.int64)


def test_score_analyses_run_on_a_tensor_too_large_to_densify():
    # repair works from the nonzero cells (it used to refuse this tensor as too large)
    from foldcorr.pipeline import evaluate_with

    cells = sparse.COO(np.array([[0, 1, 2, 4], [0, 1, 3, 4]]), np.array([5, 3, 2, 4]),
                       shape=(10**5, 10**5))
    t = validate_tensor(xr.DataArray(cells, dims=("actual", "predicted"), name="count"))
    ev = fc.evaluate(t)  # the figures need only the nonzero cells
    assert ev.per_class.sizes["class"] == 10**5
    # the first MAX_PLACES places are named, the rest counted
    assert any(re.search(r"class=52; and 999\d\d more", w) for w in ev.warnings)
    ra = evaluate_with(t).extras["repair"]
    assert is_sparse(ra.pair_gain) and ra.pair_gain.data.nnz == 1
    # classes without samples do not change R_K: sklearn on the labels of the five classes
    truth = np.repeat([0, 1, 2, 4], [5, 3, 2, 4])
    pred = np.repeat([0, 1, 3, 4], [5, 3, 2, 4])
    fixed = np.where(truth == 2, 2, pred)
    gain = matthews_corrcoef(truth, fixed) - matthews_corrcoef(truth, pred)
    assert ra.confusion_rows()[0][2] == 2
    assert ra.confusion_rows()[0][3] == pytest.approx(gain, abs=1e-12)

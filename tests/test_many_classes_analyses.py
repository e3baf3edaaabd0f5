"""The analyses of score on sparse cells: repair, shift and intervals equal the dense path."""

import warnings

import numpy as np
import pytest
import xarray as xr
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sklearn.metrics import matthews_corrcoef

from foldcorr.analysis.gains import (class_gains, costliest_confusions, leave_class_out,
                                     pair_gains)
from foldcorr.analysis.intervals import jackknife_moments
from foldcorr.analysis.repair import repair_analysis
from foldcorr.analysis.resampling import Strata
from foldcorr.analysis.shift import shifted_figures
from foldcorr.analysis.uncertainty import summarise_uncertainty
from foldcorr.errors import UndefinedMetricWarning
from foldcorr.metrics import rk
from foldcorr.pipeline import ScoreOptions, evaluate_with
from foldcorr.tensor import as_dense, is_sparse, pool, tally, tally_columns, validate_tensor
from strategies import label_arrays


def _sparse(truth, pred, folds=None):
    leading = None if folds is None else {"fold": folds}
    return validate_tensor(tally_columns({"actual": ("truth", truth), "predicted": ("pred", pred)},
                                         leading=leading, sparse_above=0))


def _quiet(fn, *args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        return fn(*args, **kwargs)


def _same(a, b):
    for name in a.data_vars:
        x, y = a[name].values, b[name].values
        if x.dtype == object:
            assert x.tolist() == y.tolist(), name
        else:
            np.testing.assert_allclose(x, y, rtol=1e-12, atol=1e-12, err_msg=name)


def _codes(n, k, folds, seed):
    rng = np.random.default_rng(seed)
    truth = rng.integers(0, k, n)
    pred = np.where(rng.random(n) < 0.5, truth, rng.integers(0, k, n))
    return truth, pred, rng.integers(0, folds, n)


@settings(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(label_arrays(folds=True), st.sampled_from(["zero", "nan"]))
def test_repair_on_sparse_cells_equals_the_dense_path(data, undefined):
    # empty rows and columns, single-class folds, K = 1 or 2 (tests/strategies.py)
    dense = tally(data["truth"], data["pred"], folds=data["folds"])
    sp = _sparse(data["truth"], data["pred"], data["folds"])
    assert is_sparse(sp)
    for fn in (class_gains, costliest_confusions):
        _same(_quiet(fn, sp, undefined=undefined), _quiet(fn, dense, undefined=undefined))
    np.testing.assert_allclose(_quiet(leave_class_out, sp, undefined=undefined).values,
                               _quiet(leave_class_out, dense, undefined=undefined).values,
                               rtol=1e-12, atol=1e-12)
    gains = _quiet(pair_gains, sp, undefined=undefined)
    want = _quiet(pair_gains, dense, undefined=undefined).values
    assert is_sparse(gains)
    stored = tuple(gains.data.coords)
    np.testing.assert_allclose(gains.data.data, want[stored], rtol=1e-12, atol=1e-12)
    if undefined == "zero":  # every other cell reads as the gain of moving nothing, 0
        np.testing.assert_allclose(gains.data.todense(), want, atol=1e-12)
    a, b = _quiet(repair_analysis, sp, undefined=undefined), _quiet(repair_analysis, dense,
                                                                   undefined=undefined)
    _same(a.per_class, b.per_class)
    np.testing.assert_equal(a.confusion_rows(), b.confusion_rows())  # NaN equals NaN
    assert a.warnings == b.warnings


@settings(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(label_arrays(max_classes=5, max_size=80))
def test_sparse_repairs_equal_sklearn_on_repaired_labels(data):
    # sklearn.metrics.matthews_corrcoef (0 where undefined, as undefined="zero") of the labels
    # after each repair, minus that of the labels as they are
    truth, pred = np.asarray(data["truth"]), np.asarray(data["pred"])
    sp = _sparse(truth, pred)
    classes = sp.coords["actual"].values
    base = matthews_corrcoef(truth, pred)
    fix = _quiet(class_gains, sp)
    out = _quiet(leave_class_out, sp).values
    for c, label in enumerate(classes):
        fn = np.where(truth == label, label, pred)
        assert fix.gain_fix_fn.values[c] == pytest.approx(matthews_corrcoef(truth, fn) - base,
                                                          abs=1e-9)
        keep = (truth != label) & (pred != label)
        rest = matthews_corrcoef(truth[keep], pred[keep]) if keep.any() else 0.0
        assert out[c] == pytest.approx(rest - base, abs=1e-9)
    for a, p, n, gain in _quiet(repair_analysis, sp).confusion_rows():
        moved = np.where((truth == a) & (pred == p), a, pred)
        assert n == int(((truth == a) & (pred == p)).sum())
        assert gain == pytest.approx(matthews_corrcoef(truth, moved) - base, abs=1e-9)


def test_shift_on_sparse_cells_equals_the_dense_path():
    truth, pred, folds = _codes(3_000, 40, 3, seed=4)
    dense, sp = tally(truth, pred, folds=folds), _sparse(truth, pred, folds)
    a, b = shifted_figures(sp, "uniform"), shifted_figures(dense, "uniform")
    assert is_sparse(a.tensor)
    np.testing.assert_allclose(as_dense(a.tensor).values, b.tensor.values, rtol=1e-12)
    _same(a.pooled, b.pooled)
    _same(a.per_class, b.per_class)
    np.testing.assert_allclose(a.observed.values, b.observed.values, rtol=1e-12)


@pytest.mark.parametrize("method", ["percentile", "bca"])
def test_intervals_on_sparse_cells_equal_the_dense_path_with_the_same_seed(method):
    # the strata hold the same nonzero cells in the same order, so the same seed gives the
    # same multinomial draws; sparse blocks of resamples must then give the same figures
    truth, pred, folds = _codes(2_000, 30, 3, seed=5)
    dense, sp = tally(truth, pred, folds=folds), _sparse(truth, pred, folds)
    a = _quiet(summarise_uncertainty, sp, n_resamples=200, seed=7, method=method)
    b = _quiet(summarise_uncertainty, dense, n_resamples=200, seed=7, method=method)
    for name in ("rk", "fold_rk", "mcc", "drag"):
        x, y = getattr(a, name), getattr(b, name)
        for end in ("low", "high"):
            np.testing.assert_allclose(getattr(x, end).values, getattr(y, end).values,
                                       rtol=1e-10, atol=1e-12, err_msg=f"{name} {end}")


def test_sparse_blocks_hold_the_same_resamples_as_dense_blocks():
    truth, pred, folds = _codes(500, 12, 2, seed=6)
    strata = Strata.of(tally(truth, pred, folds=folds), ("actual", "predicted"))
    draws = strata.draw(np.random.default_rng(0), 4)
    np.testing.assert_array_equal(strata.sparse_block(draws).data.todense(),
                                  strata.dense(draws).values)
    # margins and trace rebuilt from the sparse block: the same R_K per resample and fold
    np.testing.assert_allclose(rk(strata.sparse_block(draws)).values,
                               rk(strata.dense(draws)).values, rtol=1e-12)


def test_jackknife_moments_on_sparse_cells_equal_the_dense_path():
    truth, pred, folds = _codes(600, 15, 3, seed=8)
    dense, sp = tally(truth, pred, folds=folds), _sparse(truth, pred, folds)
    for pooled in (True, False):
        est = rk(pool(dense) if pooled else dense)
        got = jackknife_moments(sp, rk, pooled, est, "R_K")
        want = jackknife_moments(dense, rk, pooled, est, "R_K")
        for g, w in zip(got, want):
            np.testing.assert_allclose(g.values, w.values, rtol=1e-10)


def test_score_analyses_keep_a_sparse_tensor_sparse():
    truth, pred, folds = _codes(4_000, 60, 3, seed=9)
    dense, sp = tally(truth, pred, folds=folds), _sparse(truth, pred, folds)
    options = ScoreOptions(level=0.9, n_resamples=100, seed=3, prevalence="uniform")
    a, b = _quiet(evaluate_with, sp, options), _quiet(evaluate_with, dense, options)
    assert is_sparse(a.extras["repair"].pair_gain)
    assert is_sparse(a.extras["shifted"].tensor)
    np.testing.assert_equal(a.extras["repair"].confusion_rows(),
                            b.extras["repair"].confusion_rows())
    np.testing.assert_allclose(a.extras["uncertainty"].rk.low.values,
                               b.extras["uncertainty"].rk.low.values, rtol=1e-10)
    assert float(a.extras["shifted"].rk) == pytest.approx(float(b.extras["shifted"].rk), abs=1e-12)
    assert isinstance(a.extras["repair"].per_class, xr.Dataset)


def test_paired_comparison_on_sparse_cells_equals_the_dense_path(monkeypatch):
    # a sparse joint tensor gives the same joint cells; resampled and permuted tensors drawn
    # sparse use the same draws as dense ones, so the same seed gives the same figures
    from foldcorr.analysis import compare
    from foldcorr.tensor import joint, joint_tally

    truth, a, folds = _codes(600, 40, 3, seed=10)
    b = np.where(np.random.default_rng(11).random(600) < 0.7, truth, a)
    dense = joint_tally(truth, a, b, folds=folds)
    monkeypatch.setattr(joint, "DENSE_CELL_LIMIT", 0)
    sp = joint_tally(truth, a, b, folds=folds)
    assert is_sparse(sp) and not is_sparse(dense)
    np.testing.assert_array_equal(as_dense(sp).values, dense.values)
    got = _quiet(compare.compare_models, sp, n_resamples=200, n_permutations=200, seed=2)
    monkeypatch.setattr(compare.PairStrata, "sparse", property(lambda self: False))
    want = _quiet(compare.compare_models, dense, n_resamples=200, n_permutations=200, seed=2)
    assert got.difference == pytest.approx(want.difference, abs=1e-12)
    np.testing.assert_allclose(got.ci, want.ci, rtol=1e-10)
    assert got.p_value == pytest.approx(want.p_value, abs=1e-12)


def test_json_of_every_class_is_streamed_to_the_file(tmp_path, monkeypatch):
    # the file holds what dumps gives (json.loads of both equal, the standard library's
    # parser), written piece by piece: dumps, which builds the whole string, is never called
    import json

    from foldcorr.cli import main
    from foldcorr.report import json as report_json

    truth, pred, folds = _codes(3_000, 300, 3, seed=12)
    path = tmp_path / "p.csv"
    path.write_text("actual,predicted,fold\n" + "".join(
        f"c{t},c{p},{f}\n" for t, p, f in zip(truth, pred, folds)))
    monkeypatch.setattr(report_json, "dumps", lambda doc: pytest.fail("dumps was called"))
    assert main(["score", str(path), "--format", "json", "--output", str(tmp_path / "o.json")]) == 0
    text = (tmp_path / "o.json").read_text(encoding="utf-8")
    doc = json.loads(text)
    assert len(doc["per_class"]) == 300 and len(doc["confusions"]) > 300
    monkeypatch.undo()
    from foldcorr.pipeline import score
    from foldcorr.report import render

    # the same text as the whole document rendered at once (what to_json gives)
    assert text.rstrip("\n") == render(_quiet(score, str(path)), "json").rstrip("\n")

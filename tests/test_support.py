"""Per-class intervals are withheld (NaN, one warning) for classes too thin to support one."""

import warnings

import numpy as np
import pytest

import foldcorr as fc
from foldcorr.errors import UndefinedMetricWarning
from foldcorr.tensor import tally


def _data():
    rng = np.random.default_rng(0)
    truth = np.concatenate([rng.integers(0, 3, 200), [3, 3]])  # class 3: two samples
    pred = np.where(rng.random(202) < 0.8, truth, rng.integers(0, 3, 202))
    pred[:5] = truth[:5]
    return truth, pred


def test_bootstrap_withholds_thin_classes_with_one_warning_naming_them():
    truth, pred = _data()
    t = tally(truth, pred)
    with pytest.warns(UndefinedMetricWarning, match=r"none for classes \[3\]"):
        res = fc.bootstrap(t, fc.ovr_mcc, n_resamples=200, seed=0)
    assert np.isnan(res.low.sel({"class": 3})) and np.isnan(res.high.sel({"class": 3}))
    assert np.isfinite(res.low.sel({"class": [0, 1, 2]})).all()
    assert np.isfinite(res.estimate.sel({"class": 3}))  # the point estimate stays


def test_summarise_uncertainty_warns_once():
    truth, pred = _data()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        u = fc.summarise_uncertainty(tally(truth, pred), n_resamples=200, seed=0)
    thin = [w for w in caught if "none for classes" in str(w.message)]
    assert len(thin) == 1
    assert np.isnan(u.mcc.low.sel({"class": 3})) and np.isnan(u.drag.low.sel({"class": 3}))


def test_a_class_without_errors_gets_no_interval():
    truth = np.repeat([0, 1, 2], 30)
    pred = truth.copy()
    pred[:3] = 1  # class 2 is never confused with anything
    with pytest.warns(UndefinedMetricWarning, match=r"none for classes \[2\]"):
        res = fc.bootstrap(tally(truth, pred), fc.ovr_mcc, n_resamples=200, seed=0)
    assert np.isnan(res.low.values[2]) and np.isfinite(res.low.values[:2]).all()


def test_paired_comparison_withholds_thin_classes():
    truth, pred = _data()
    other = np.where(np.arange(202) % 7 == 0, (truth + 1) % 4, truth)
    c = fc.compare_models(fc.joint_tally(truth, pred, other), n_resamples=200, seed=0)
    assert np.isnan(c.per_class["low"].sel({"class": 3}))
    assert any("none for classes [3]" in w for w in c.warnings)

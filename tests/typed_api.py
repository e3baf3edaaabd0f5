"""The public API as a type checker sees it: each call's type, as a user of ``foldcorr`` gets it.

Checked by mypy in ``tests/test_typing.py`` (configuration in ``pyproject.toml``); the functions
are never called.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
import xarray as xr

import foldcorr as fc

if TYPE_CHECKING:
    from typing_extensions import assert_type


def held_out(truth: np.ndarray, pred: np.ndarray, folds: list[int]) -> None:
    t = fc.tally(truth, pred, folds=folds, classes=["a", "b"])
    assert_type(t, xr.DataArray)
    assert_type(fc.validate_tensor(t), xr.DataArray)
    assert_type(fc.rk(t, undefined="nan"), xr.DataArray)
    assert_type(fc.ovr_mcc(t), xr.DataArray)
    assert_type(fc.decompose(t), xr.Dataset)
    assert_type(fc.rk_score(truth, pred, sample_weight=np.ones(len(truth))), float)
    ev = fc.evaluate(t)
    assert_type(ev, fc.Evaluation)
    assert_type(ev.to_dict(), dict[str, float])
    assert_type(ev.to_frame("class"), pd.DataFrame)
    assert_type(fc.render(ev, "markdown"), str)


def uncertainty(t: xr.DataArray, cluster: fc.ClusterCells) -> None:
    assert_type(fc.bootstrap(t, fc.macro_mcc, seed=np.random.default_rng(0)), fc.BootstrapResult)
    assert_type(fc.summarise_uncertainty(t, seed=0, cluster=cluster), fc.Uncertainty)
    assert_type(fc.fold_statistics(t), fc.FoldStatistics)
    assert_type(fc.repair_analysis(t), fc.RepairAnalysis)
    assert_type(fc.shifted_figures(t, {"a": 0.5, "b": 0.5}), fc.ShiftResult)
    assert_type(fc.holm([0.01, 0.2]), np.ndarray)


def comparisons(truth: np.ndarray, a: np.ndarray, b: np.ndarray) -> None:
    joint = fc.joint_tally(truth, a, b)
    assert_type(fc.compare_models(joint, seed=1), fc.Comparison)
    assert_type(fc.compare_many(truth, {"a": a, "b": b}), fc.ManyComparison)
    assert_type(fc.cluster_tally(truth, a, cluster=np.arange(len(truth))), fc.ClusterCells)


def scikit_learn(estimator: Any, X: np.ndarray, y: np.ndarray) -> None:
    assert_type(fc.cross_tally(estimator, X, y, cv=5), xr.DataArray)
    assert_type(fc.cross_tally(estimator, X, y, return_predictions=True),
                tuple[xr.DataArray, np.ndarray])
    assert_type(fc.compare_estimators({"a": estimator, "b": estimator}, X, y, cv=3),
                fc.ManyComparison)


def files(path: str) -> None:
    assert_type(fc.load(path, where='split == "test"'), xr.DataArray)
    assert_type(fc.score(path, top=5), fc.Evaluation)
    assert_type(fc.load_evaluation(path)[0], fc.Evaluation)
    assert_type(fc.load_saved(path), fc.SavedEvaluation)
    assert_type(fc.stream_tensor(path), fc.StreamResult)

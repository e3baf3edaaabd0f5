"""Undefined values met while resampling are reported for the statistic, class and fold they
come from, never for another statistic computed on the same resamples.

The case: 40 classes, two of them rare (one sample each). A resample that leaves a rare class
out makes its one-vs-rest MCC 0/0; R_K is 0/0 only when all truths or all predictions fall in one
class (Gorodkin 2004, the formula's denominator), which 40 well-filled classes never do.
"""

import warnings

import numpy as np

import foldcorr as fc
from foldcorr.analysis.compare import compare_models
from foldcorr.analysis.uncertainty import bootstrap, summarise_uncertainty
from foldcorr.errors import UndefinedMetricWarning, places_text, undefined_places
from foldcorr.metrics import ovr_mcc, rk


def _forty_classes(folds=True):
    rng = np.random.default_rng(3)
    y = np.concatenate([np.repeat(np.arange(38), 30), [38, 39]])
    pred = np.where(rng.random(y.size) < 0.2, rng.integers(0, 40, y.size), y)
    fold = rng.integers(0, 3, y.size) if folds else None
    return y, pred, fold


def _quiet(f, *a, **k):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        return f(*a, **k)


def test_per_class_undefined_values_are_not_reported_as_r_k():
    y, pred, fold = _forty_classes()
    t = fc.tally(y, pred, folds=fold)
    res = _quiet(summarise_uncertainty, t, level=0.9, n_resamples=300, seed=1)
    notes = res.warnings
    assert not any(n.startswith("bootstrap of R_K") for n in notes), notes
    mcc_notes = [n for n in notes if n.startswith("bootstrap of one-vs-rest MCC")]
    assert mcc_notes and all("class 38" in n or "class 39" in n for n in mcc_notes)
    # outside check of the premise: no resample can make R_K 0/0 here (Gorodkin 2004)
    assert len(set(y)) > 2 and len(set(pred)) > 2


def test_each_note_names_the_fold_of_a_per_fold_statistic():
    y, pred, fold = _forty_classes()
    t = fc.tally(y, pred, folds=fold)
    res = _quiet(bootstrap, t, ovr_mcc, n_resamples=200, seed=2, pool=False)
    (note,) = [n for n in res.warnings if n.startswith("bootstrap of one-vs-rest MCC")]
    assert "fold " in note and "class " in note


def test_r_k_undefined_is_still_reported_as_r_k():
    # one actual class in fold 1: R_K of that fold is 0/0 in every resample (Gorodkin 2004)
    t = fc.tally([0, 0, 0, 0, 1, 1], [0, 1, 0, 0, 1, 0], folds=[1, 1, 1, 1, 2, 2])
    res = _quiet(bootstrap, t, rk, n_resamples=100, seed=0, pool=False)
    assert any(n.startswith("bootstrap of R_K (fold 1") for n in res.warnings), res.warnings


def test_comparison_names_the_statistic_and_class():
    y, pred, fold = _forty_classes(folds=False)
    other = np.where((pred == 5) & (np.arange(pred.size) % 2 == 0), 6, pred)
    joint = fc.joint_tally(y, pred, other)
    comp = _quiet(compare_models, joint, n_resamples=200, seed=0)
    assert not any("R_K undefined" in n for n in comp.warnings), comp.warnings
    assert any(n.startswith("comparison: one-vs-rest MCC undefined") and ("class 38" in n or "class 39" in n)
               for n in comp.warnings), comp.warnings


def test_places_are_read_from_the_warning():
    t = fc.confusion_tensor([[3, 0, 0], [1, 2, 0], [0, 0, 0]], ["a", "b", "c"])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        ovr_mcc(t)
    assert undefined_places(caught) == {"class": ["c"]}
    assert places_text(undefined_places(caught)) == "class 'c'"


def test_gate_paired_drop_does_not_blame_r_k(tmp_path, capsys):
    import json

    import pandas as pd

    from foldcorr.cli import main

    y, pred, _ = _forty_classes(folds=False)
    other = np.where((pred == 5) & (np.arange(pred.size) % 2 == 0), 6, pred)
    ids = np.arange(y.size)
    pd.DataFrame({"id": ids, "actual": y, "predicted": pred}).to_csv(tmp_path / "a.csv", index=False)
    pd.DataFrame({"id": ids, "actual": y, "predicted": other}).to_csv(tmp_path / "b.csv", index=False)
    code = main(["gate", str(tmp_path / "b.csv"), "--baseline", str(tmp_path / "a.csv"), "--id", "id",
                 "--max-drop", "0.5", "--confidence", "0.9", "--resamples", "200", "--seed", "0",
                 "--format", "json"])
    assert code == 0
    notes = json.loads(capsys.readouterr().out)["warnings"]
    assert not any("R_K undefined" in n or "bootstrap of R_K" in n for n in notes), notes
    assert any("one-vs-rest MCC undefined" in n and "class '38'" in n for n in notes), notes

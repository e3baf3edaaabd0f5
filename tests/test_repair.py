"""Repair gains, leave-class-out, costliest confusions and fold stability.

Every gain is checked against scikit-learn's ``matthews_corrcoef`` (which
computes Gorodkin's R_K for K > 2; scikit-learn docs, sklearn.metrics) on
relabelled samples: the repair is done on the sample labels, not on the
matrix, so the check shares no algebra with the code under test.
"""

from __future__ import annotations

import subprocess
import sys
import warnings

import numpy as np
import pandas as pd
import pytest
import xarray as xr
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import rankdata
from sklearn.metrics import matthews_corrcoef

from foldcorr.analysis import gains as repair_gains
from foldcorr.analysis import repair
from foldcorr.errors import InvalidTensorError, OptionError, UndefinedMetricWarning
from foldcorr.decomposition import decompose
from foldcorr.tensor import confusion_tensor, tally


def samples(cells: np.ndarray):
    """Expand a count matrix into (actual, predicted) sample labels."""
    k = cells.shape[0]
    index = np.repeat(np.arange(k * k), cells.reshape(-1))
    return index // k, index % k


def reference(actual, predicted) -> float:
    """sklearn.metrics.matthews_corrcoef; 0.0 for no samples (the zero convention)."""
    if len(actual) == 0:
        return 0.0  # nothing left: R_K is 0/0, which the zero convention reports as 0.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return float(matthews_corrcoef(actual, predicted))


matrices = st.integers(1, 6).flatmap(
    lambda k: st.lists(st.integers(0, 8), min_size=k * k, max_size=k * k).map(
        lambda v: np.array(v, dtype=np.int64).reshape(k, k)))


def quiet(fn, *args, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        return fn(*args, **kw)


@settings(max_examples=80, deadline=None)
@given(matrices)
def test_pair_gains_equal_relabelled_reference(cells):
    k = len(cells)
    t = confusion_tensor(cells, [f"c{i}" for i in range(k)])
    gains = quiet(repair_gains.pair_gains, t).values
    a, p = samples(cells)
    base = reference(a, p)
    for i in range(k):
        for j in range(k):
            fixed = p.copy()
            fixed[(a == i) & (p == j)] = i  # the samples of cell (i, j) now predicted right
            assert gains[i, j] == pytest.approx(reference(a, fixed) - base, abs=1e-9)


@settings(max_examples=80, deadline=None)
@given(matrices)
def test_class_gains_and_leave_out_equal_relabelled_reference(cells):
    k = len(cells)
    t = confusion_tensor(cells, list(range(k)))
    g = quiet(repair_gains.class_gains, t)
    out = quiet(repair_gains.leave_class_out, t).values
    a, p = samples(cells)
    base = reference(a, p)
    for c in range(k):
        fn = np.where(a == c, c, p)  # every sample of class c predicted c
        fp = np.where(p == c, a, p)  # every sample predicted c gets its own class
        both = np.where(a == c, c, fp)
        keep = (a != c) & (p != c)  # the samples neither of nor taken for c
        assert g.gain_fix_fn.values[c] == pytest.approx(reference(a, fn) - base, abs=1e-9)
        assert g.gain_fix_fp.values[c] == pytest.approx(reference(a, fp) - base, abs=1e-9)
        assert g.gain_fix_both.values[c] == pytest.approx(reference(a, both) - base, abs=1e-9)
        assert out[c] == pytest.approx(reference(a[keep], p[keep]) - base, abs=1e-9)


@settings(max_examples=40, deadline=None)
@given(st.lists(matrices, min_size=2, max_size=3).filter(lambda ms: len({len(m) for m in ms}) == 1))
def test_functions_broadcast_over_leading_dims(stack):
    cells = np.stack(stack)
    k = cells.shape[-1]
    t = confusion_tensor(cells, list(range(k)), leading={"fold": list(range(len(stack)))})
    whole = {name: quiet(fn, t) for name, fn in
             (("pair", repair_gains.pair_gains), ("out", repair_gains.leave_class_out))}
    fix = quiet(repair_gains.class_gains, t)
    for f in range(len(stack)):
        one = t.isel(fold=f)
        np.testing.assert_allclose(whole["pair"].isel(fold=f), quiet(repair_gains.pair_gains, one))
        np.testing.assert_allclose(whole["out"].isel(fold=f), quiet(repair_gains.leave_class_out, one))
        np.testing.assert_allclose(fix.gain_fix_both.isel(fold=f),
                                   quiet(repair_gains.class_gains, one).gain_fix_both)


def test_labels_and_dims():
    t = confusion_tensor([[5, 1, 0], [2, 6, 0], [0, 3, 3]], ["a", "b", "c"])
    g = repair_gains.pair_gains(t)
    assert g.dims == ("actual", "predicted") and g.name == "gain"
    assert g.coords["actual"].values.tolist() == ["a", "b", "c"]
    assert np.all(np.diag(g.values) == 0)  # moving nothing gains nothing
    assert repair_gains.class_gains(t).gain_fix_fn.dims == ("class",)
    assert repair_gains.leave_class_out(t).coords["class"].values.tolist() == ["a", "b", "c"]


def test_undefined_after_repair_follows_the_convention():
    # [[0, 3], [2, 0]] has MCC -1 (common practice: anti-diagonal 2x2). Moving cell
    # (a, b) to (a, a) leaves every prediction 'a': R_K is 0/0 after the repair.
    t = confusion_tensor([[0, 3], [2, 0]], ["a", "b"])
    with pytest.warns(UndefinedMetricWarning, match=r"after moving.*actual='a' predicted='b'"):
        zero = repair_gains.pair_gains(t)
    assert float(zero.sel(actual="a", predicted="b")) == pytest.approx(1.0)  # -1 -> 0.0
    with pytest.warns(UndefinedMetricWarning, match=r"taken as NaN"):
        nan = repair_gains.pair_gains(t, undefined="nan")
    assert np.isnan(float(nan.sel(actual="a", predicted="b")))
    # the other cell is the mirror case (every prediction 'b' afterwards)
    assert np.isnan(float(nan.sel(actual="b", predicted="a")))
    assert float(zero.sel(actual="b", predicted="a")) == pytest.approx(1.0)


def test_one_class_has_nothing_to_repair():
    t = confusion_tensor([[7]], ["only"])
    with pytest.warns(UndefinedMetricWarning, match="before repair"):
        g = repair_gains.pair_gains(t)
    assert g.values.tolist() == [[0.0]]
    ra = repair.repair_analysis(t)
    assert any("one class" in w for w in ra.warnings)
    assert ra.confusions.sizes["rank"] == 0 and ra.confusion_rows() == []
    assert quiet(repair_gains.class_gains, t, undefined="nan").gain_fix_fn.isnull().all()


def test_class_without_support_is_defined():
    # 'c' is predicted but never actual: fixing its false negatives changes nothing,
    # fixing its false positives moves its column to the diagonal.
    cells = np.array([[4, 1, 1], [0, 5, 2], [0, 0, 0]])
    t = confusion_tensor(cells, ["a", "b", "c"])
    g = repair_gains.class_gains(t)
    assert float(g.gain_fix_fn.sel({"class": "c"})) == 0.0
    a, p = samples(cells)
    expected = reference(a, np.where(p == 2, a, p)) - reference(a, p)
    assert float(g.gain_fix_fp.sel({"class": "c"})) == pytest.approx(expected)


def test_costliest_confusions_rank_every_nonempty_cell():
    rng = np.random.default_rng(3)
    cells = rng.integers(0, 6, (7, 7))
    t = confusion_tensor(cells, list("abcdefg"))
    gains = repair_gains.pair_gains(t).values
    everything = repair_gains.costliest_confusions(t, top=None)
    off = [(i, j) for i in range(7) for j in range(7) if i != j and cells[i, j] > 0]
    assert everything.sizes["rank"] == len(off)
    expected = sorted(off, key=lambda ij: (-gains[ij], -cells[ij], ij))
    got = list(zip(everything.actual.values, everything.predicted.values))
    assert got == [("abcdefg"[i], "abcdefg"[j]) for i, j in expected]
    assert np.all(np.diff(everything.gain.values) <= 1e-15)
    top3 = repair_gains.costliest_confusions(t, top=3)
    assert top3.sizes["rank"] == 3 and top3.actual.values.tolist() == list(
        everything.actual.values[:3])


@pytest.mark.parametrize("bad", [0, -2, 1.5, "3", True])
def test_costliest_confusions_reject_bad_top(bad):
    t = confusion_tensor([[1, 1], [1, 1]], [0, 1])
    with pytest.raises(OptionError, match=r"`top` must be a positive whole number or None; got"):
        repair_gains.costliest_confusions(t, top=bad)


def test_costliest_confusions_pad_across_leading_dims():
    t = confusion_tensor([[[3, 1], [0, 2]], [[3, 1], [2, 2]]], ["a", "b"], leading={"fold": [1, 2]})
    c = repair_gains.costliest_confusions(t)
    assert dict(c.sizes) == {"fold": 2, "rank": 2}
    first = c.actual.sel(fold=1).values
    assert first[0] == "a" and pd.isna(first[1])
    assert int(c["count"].sel(fold=1, rank=2)) == 0 and np.isnan(float(c.gain.sel(fold=1, rank=2)))


def test_fold_stability_ranks_equal_scipy_rankdata():
    rng = np.random.default_rng(7)
    cells = rng.integers(0, 9, (4, 8, 8)) + np.eye(8, dtype=int) * 20
    t = confusion_tensor(cells, list(range(8)), leading={"fold": [1, 2, 3, 4]})
    stab = repair.fold_stability(t, top=3)
    drag = decompose(t).drag.values
    # scipy.stats.rankdata(method="min") on minus the drag: 1 for the largest, ties share
    expected = np.array([rankdata(-np.round(row, 12), method="min") for row in drag])
    np.testing.assert_array_equal(stab["rank"].values, expected)
    np.testing.assert_array_equal(stab.top_folds.values, ((expected <= 3) & (drag > 0)).sum(0))
    np.testing.assert_allclose(stab.drag_sd.values, np.std(drag, axis=0, ddof=1))
    np.testing.assert_allclose(stab.drag_max.values, drag.max(axis=0))


def test_fold_stability_needs_folds():
    with pytest.raises(InvalidTensorError, match=r"fold stability needs a 'fold' dim"):
        repair.fold_stability(confusion_tensor([[1, 0], [0, 1]], [0, 1]))


def test_perfect_class_is_not_a_top_drag_class():
    # one fold with every class perfect: all drags are 0 (common practice: MCC 1 on a
    # diagonal matrix), so no class is a top drag class there
    t = tally(list("aabbcc") * 2, list("aabbcc") + list("abbbca"), folds=[1] * 6 + [2] * 6)
    stab = repair.fold_stability(t)
    assert not stab.in_top.sel(fold=1).any()
    assert stab.top_folds.values.tolist() == [1, 1, 1]


def test_repair_analysis_gathers_everything():
    t = tally(list("aabbccdd") * 3, list("abbbcadd") * 3, folds=[1, 2, 3] * 8)
    ra = repair.repair_analysis(t, top=2)
    assert ra.confusions.sizes["rank"] == 2 and ra.top == 2
    assert set(ra.per_class.data_vars) >= {"gain_fix_fn", "gain_fix_fp", "gain_fix_both",
                                           "leave_out_delta", "top_folds", "drag_sd"}
    pooled = t.sum("fold")
    xr.testing.assert_allclose(ra.pair_gain, repair_gains.pair_gains(pooled))
    assert ra.rk == pytest.approx(reference(*samples(pooled.values)))
    with pytest.raises(InvalidTensorError, match="select or pool"):
        repair.repair_analysis(t.expand_dims(model=["m"]))
    with pytest.raises(OptionError, match="`undefined` must be one of"):
        repair.repair_analysis(t, undefined="none")


def test_the_analysis_layer_loads_no_plotting_or_terminal_library():
    code = ("import sys, foldcorr.analysis.repair, foldcorr.metrics; "
            "print(sorted(m for m in ('matplotlib', 'rich', 'dask') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def _exact_rk(counts) -> float:
    # Gorodkin's R_K (Gorodkin 2004) in exact integer arithmetic, with one 60-digit square
    # root: an outside reference that shares no floating-point step with the code.
    from decimal import Decimal, localcontext

    c = np.asarray(counts, dtype=object)
    s, trace = int(c.sum()), int(np.trace(c))
    t, p = [int(v) for v in c.sum(axis=1)], [int(v) for v in c.sum(axis=0)]
    num = trace * s - sum(a * b for a, b in zip(t, p))
    dp, dt = s * s - sum(v * v for v in p), s * s - sum(v * v for v in t)
    with localcontext() as ctx:
        ctx.prec = 60
        return float(Decimal(num) / (Decimal(dp) * Decimal(dt)).sqrt())


def test_repairs_match_exact_arithmetic_on_a_dominant_class():
    # One class holds nearly every sample; leave-class-out and pair gains (computed from the
    # margins and correlation formula shared with foldcorr.metrics) against exact R_K.
    counts = np.array([[10**6, 5, 3], [7, 900, 40], [2, 30, 600]], dtype=np.int64)
    t = confusion_tensor(counts, ["a", "b", "c"])
    before = _exact_rk(counts)
    for k in range(3):
        keep = [i for i in range(3) if i != k]
        expected = _exact_rk(counts[np.ix_(keep, keep)]) - before
        got = float(repair_gains.leave_class_out(t).isel({"class": k}))
        assert abs(got - expected) < 1e-12, (k, got, expected)
    gains = repair_gains.pair_gains(t).values
    for i in range(3):
        for j in range(3):
            if i != j:
                moved = counts.copy()
                moved[i, i] += moved[i, j]
                moved[i, j] = 0
                assert abs(gains[i, j] - (_exact_rk(moved) - before)) < 1e-12, (i, j)
    assert abs(repair.repair_analysis(t).rk - before) < 1e-12

"""Score sweeps, checked against a brute-force loop with scikit-learn."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from sklearn.metrics import (
    accuracy_score, confusion_matrix, f1_score, matthews_corrcoef, precision_score, recall_score,
)

from foldcorr.errors import InvalidInputError
from foldcorr.analysis.thresholds import sweep, threshold_curve


def _brute(y, s, full=True):
    """Every distinct threshold with the reference library (sklearn.metrics)."""
    rows = []
    for theta in np.unique(s):
        p = s >= theta
        if not full:
            rows.append((theta, 0, 0, 0, 0, matthews_corrcoef(y, p)))
            continue
        tn, fp, fn, tp = confusion_matrix(y, p, labels=[False, True]).ravel()
        rows.append((theta, tp, fp, fn, tn, matthews_corrcoef(y, p), accuracy_score(y, p),
                     f1_score(y, p, zero_division=0), recall_score(y, p, zero_division=0),
                     precision_score(y, p, zero_division=0)))
    return np.array(rows, dtype=float)


@pytest.mark.parametrize("case", ["ties", "continuous", "constant", "all_negative"])
def test_curve_equals_brute_force(case):
    rng = np.random.default_rng(7)
    y = rng.random(200) < 0.3
    if case == "ties":
        s = np.round(rng.random(200) + 0.5 * y, 1)  # heavy ties
    elif case == "continuous":
        s = rng.normal(size=200) + y
    elif case == "constant":
        s = np.full(200, 0.25)
    else:
        y = np.zeros(200, bool)
        s = rng.integers(0, 5, 200).astype(float)
    c = threshold_curve(y, s)
    ref = _brute(y, s)
    got = np.column_stack([c[k].values for k in
                           ("threshold", "tp", "fp", "fn", "tn", "mcc", "accuracy", "f1",
                            "recall", "precision")])
    np.testing.assert_allclose(got, ref, atol=1e-12)


def test_best_and_at_threshold_match_brute_force():
    rng = np.random.default_rng(8)
    y = rng.random(500) < 0.2
    s = np.round(rng.random(500) + 0.6 * y, 2)
    r = sweep(y, s, at=0.55).labels[0]
    ref = _brute(y, s, full=False)
    assert r.best_mcc == pytest.approx(ref[:, 5].max(), abs=1e-12)
    best_rows = ref[np.isclose(ref[:, 5], ref[:, 5].max(), atol=1e-12)]
    assert r.best_threshold == best_rows[:, 0].max()  # ties go to the highest threshold
    # sklearn.metrics.matthews_corrcoef at the user's threshold
    assert r.mcc_at == pytest.approx(matthews_corrcoef(y, s >= 0.55), abs=1e-12)
    assert r.n_thresholds == len(np.unique(s))


def test_crossfold_choice_matches_brute_force_on_the_other_folds():
    rng = np.random.default_rng(9)
    y = rng.random(400) < 0.35
    s = np.round(rng.random(400) + 0.5 * y, 2)
    folds = rng.integers(0, 4, 400)
    r = sweep(y, s, folds=folds).labels[0]
    held = []
    for j in range(4):
        train, test = folds != j, folds == j
        ref = _brute(y[train], s[train], full=False)
        top = ref[:, 5].max()
        theta = ref[np.isclose(ref[:, 5], top, atol=1e-12), 0].max()
        assert float(r.crossfold["threshold"].sel(fold=j)) == theta
        # sklearn.metrics.matthews_corrcoef on the held-out fold
        held.append(matthews_corrcoef(y[test], s[test] >= theta))
        assert float(r.crossfold["mcc"].sel(fold=j)) == pytest.approx(held[-1], abs=1e-12)
    assert r.crossfold_mcc == pytest.approx(np.mean(held), abs=1e-12)
    assert r.optimism == pytest.approx(r.best_mcc - np.mean(held))


def test_multilabel_sweep_per_column():
    rng = np.random.default_rng(10)
    y = rng.random((300, 3)) < [0.1, 0.4, 0.7]
    s = np.round(rng.random((300, 3)) + 0.4 * y, 1)
    r = sweep(y, s, labels=["a", "b", "c"])
    assert [x.label for x in r.labels] == ["a", "b", "c"]
    for j, x in enumerate(r.labels):
        best = _brute(y[:, j], s[:, j], full=False)[:, 5].max()
        assert x.best_mcc == pytest.approx(best, abs=1e-12)


def test_degenerate_labels_are_named_in_warnings():
    r = sweep(np.array([[0, 1], [0, 0], [0, 1]]), np.array([[0.1, 0.5], [0.4, 0.5], [0.2, 0.5]]),
              labels=["never", "flat"])
    assert any("'never'" in w and "no positives" in w for w in r.warnings)
    assert any("'flat'" in w and "constant" in w for w in r.warnings)


def test_bad_scores_and_truth():
    with pytest.raises(InvalidInputError, match=r"row 2: score nan is not finite"):
        sweep([0, 1], [0.1, np.nan])
    with pytest.raises(InvalidInputError, match=r"row 1: score inf is not finite"):
        sweep([0, 1], [np.inf, 0.1])
    with pytest.raises(InvalidInputError, match=r"row 2: score 'high' is not a number"):
        sweep([0, 1], np.array([0.1, "high"], dtype=object))
    with pytest.raises(InvalidInputError, match=r"truth 2 is not 0/1"):
        sweep([0, 2], [0.1, 0.2])
    with pytest.raises(InvalidInputError, match="at least two folds"):
        sweep([0, 1], [0.1, 0.2], folds=[1, 1])


def test_fast_curve_mcc_equals_metrics_mcc():
    # the sweep's closed-form MCC against foldcorr.metrics.mcc on each threshold's 2 x 2 tensor,
    # both checked against sklearn above; R_K with K = 2 is Matthews' MCC (Gorodkin 2004)
    rng = np.random.default_rng(11)
    y = rng.random(1000) < 0.25
    s = np.round(rng.normal(size=1000) + y, 2)
    fast = sweep(y, s).labels[0]
    np.testing.assert_allclose(fast.curve["mcc"].values, threshold_curve(y, s)["mcc"].values,
                               atol=1e-12)
    full = fast.figures()
    np.testing.assert_allclose(full["precision"].values, threshold_curve(y, s)["precision"].values)


def test_blocked_search_equals_searchsorted():
    # numpy.searchsorted is the reference for the blocked search used on long arrays
    from foldcorr.analysis.score_counts import _locate

    rng = np.random.default_rng(12)
    values = np.sort(np.round(rng.random(50_000), 3))
    keys = np.sort(rng.choice(values, 9_000))
    np.testing.assert_array_equal(_locate(values, keys), np.searchsorted(values, keys, "left"))


@given(st.lists(st.tuples(st.booleans(), st.integers(0, 6)), min_size=1, max_size=40))
def test_counts_equal_a_direct_count_at_every_distinct_score(pairs):
    # property: TP/FP at threshold t are the numbers of positives/negatives with score >= t
    # (the threshold convention itself; common practice), ties and constant scores included
    y = np.array([p[0] for p in pairs])
    s = np.array([p[1] for p in pairs], dtype=float) / 2
    c = sweep(y, s).labels[0].curve
    for th, tp, fp in zip(c["threshold"].values, c["tp"].values, c["fp"].values):
        assert tp == np.count_nonzero(y & (s >= th)) and fp == np.count_nonzero(~y & (s >= th))
    assert c["threshold"].values.tolist() == np.unique(s).tolist()


def test_rich_rendering():
    import io

    from rich.console import Console

    console = Console(file=io.StringIO(), width=120, color_system=None)
    console.print(sweep([0, 1, 1, 0], [0.1, 0.8, 0.6, 0.3]))
    assert "best MCC" in console.file.getvalue()


def test_nan_convention_in_sweeps():
    # under undefined="nan" the all-positive threshold is NaN and the best threshold skips it
    r = sweep([0, 1, 1, 0], [0.1, 0.8, 0.6, 0.3], undefined="nan").labels[0]
    assert np.isnan(r.curve["mcc"].values[0]) and r.best_mcc == 1.0 and r.best_threshold == 0.6
    flat = sweep([0, 1], [0.5, 0.5], undefined="nan").labels[0]
    assert np.isnan(flat.best_threshold) and np.isnan(flat.best_mcc)


def _reference_sweep(y, s, folds=None, at=None):
    """A straightforward sweep: every distinct threshold, sklearn.metrics at each."""
    thresholds = np.unique(s)
    tp = np.array([np.count_nonzero(y & (s >= t)) for t in thresholds])
    fp = np.array([np.count_nonzero(~y & (s >= t)) for t in thresholds])
    mcc = np.array([matthews_corrcoef(y, s >= t) for t in thresholds])
    out = {"thresholds": thresholds, "tp": tp, "fp": fp, "mcc": mcc}
    # thresholds whose MCC is the maximum up to rounding: equal MCCs can come out of two
    # different count tables (e.g. 3/sqrt(189) and 4/sqrt(336)) one unit in the last place apart
    out["best"] = set(thresholds[np.isclose(mcc, mcc.max(), atol=1e-12)].tolist())
    if at is not None:
        out["mcc_at"] = matthews_corrcoef(y, s >= at)
    if folds is not None:
        chosen = []
        for j in np.unique(folds):
            train = folds != j
            t_train = np.unique(s[train])
            m_train = np.array([matthews_corrcoef(y[train], s[train] >= t) for t in t_train])
            chosen.append(set(t_train[np.isclose(m_train, m_train.max(), atol=1e-12)].tolist()))
        out["crossfold"] = chosen
    return out


_scores = st.one_of(
    st.integers(-3, 3).map(float),  # heavy ties, negative and zero scores
    st.sampled_from([-0.0, 0.0, 0.5, -0.5]),  # -0.0 and 0.0 are one threshold
    st.floats(-1e300, 1e300, allow_nan=False, allow_infinity=False),  # keys spanning > 2**63
)


@given(st.lists(st.tuples(st.booleans(), _scores, st.integers(0, 2)), min_size=1, max_size=30))
def test_sweep_equals_a_straightforward_reference(rows):
    # the packed-key sort against np.unique, direct counts and sklearn.metrics.matthews_corrcoef
    # at every distinct threshold, with ties, constant scores, -0.0, both signs and huge spans
    y = np.array([r[0] for r in rows])
    s = np.array([r[1] for r in rows], dtype=float)
    folds = np.array([r[2] for r in rows])
    use_folds = len(np.unique(folds)) >= 2
    r = sweep(y, s, at=0.0, folds=folds if use_folds else None).labels[0]
    ref = _reference_sweep(y, s, folds if use_folds else None, at=0.0)
    c = r.curve
    assert c["threshold"].values.tolist() == ref["thresholds"].tolist()
    np.testing.assert_array_equal(c["tp"].values, ref["tp"])
    np.testing.assert_array_equal(c["fp"].values, ref["fp"])
    np.testing.assert_array_equal(c["fn"].values, y.sum() - ref["tp"])
    np.testing.assert_array_equal(c["tn"].values, (~y).sum() - ref["fp"])
    np.testing.assert_allclose(c["mcc"].values, ref["mcc"], atol=1e-12)
    assert r.best_threshold in ref["best"] and r.n_thresholds == ref["thresholds"].size
    assert r.best_mcc == pytest.approx(ref["mcc"].max(), abs=1e-12)
    assert r.mcc_at == pytest.approx(ref["mcc_at"], abs=1e-12)
    if use_folds:
        for theta, near_best in zip(r.crossfold["threshold"].values, ref["crossfold"]):
            assert theta in near_best


def test_wide_mixed_sign_scores_are_sorted_in_two_parts():
    # scores whose integer keys span more than 2**63 take the two-part path of the packed sort;
    # the curve must still equal the direct count (common practice: admit every score >= t)
    from foldcorr.analysis.score_counts import _sort_with_truth

    rng = np.random.default_rng(13)
    s = np.concatenate([rng.normal(size=120) * 1e200, [-0.0, 0.0, 1e308, -1e308]])
    y = rng.random(s.size) < 0.4
    _, parts = _sort_with_truth(s, y)
    assert len(parts) == 2
    c = threshold_curve(y, s)
    ref = _brute(y, s)
    got = np.column_stack([c[k].values for k in ("threshold", "tp", "fp", "fn", "tn", "mcc")])
    np.testing.assert_allclose(got, ref[:, :6], rtol=0, atol=1e-12)

"""The per-class split of 1 - R_K (drag + mismatch share) and the class flags."""

import json
import warnings

import numpy as np
import pytest
import sparse
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.metrics import matthews_corrcoef

import foldcorr as fc
from foldcorr.decomposition import FLAGS, class_flags, decompose, flag_words
from foldcorr.evaluation import evaluate
from foldcorr.report import render
from foldcorr.report.tables import class_table
from foldcorr.testing import expand_counts

TOL = 1e-12


def quiet(fn, *args, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn(*args, **kw)


@st.composite
def wide_matrices(draw):
    """K x K counts, K = 2..200, few nonzero cells: many empty rows and columns."""
    k = draw(st.integers(2, 200))
    cells = draw(st.lists(st.tuples(st.integers(0, k - 1), st.integers(0, k - 1),
                                    st.integers(1, 30)), min_size=1, max_size=40))
    counts = np.zeros((k, k), dtype=np.int64)
    for i, j, n in cells:
        counts[i, j] += n
    return counts


@settings(max_examples=40)
@given(wide_matrices())
def test_shares_are_non_negative_and_add_up_to_one_minus_rk(counts):
    # Reference: sklearn.metrics.matthews_corrcoef on the expanded labels (0.0 where undefined,
    # our "zero" convention).
    truth, pred = expand_counts(counts)
    reference = quiet(matthews_corrcoef, truth, pred)
    t = fc.confusion_tensor(counts, list(range(counts.shape[0])))
    for tensor in (t, t.copy(data=sparse.COO.from_numpy(t.values))):
        d = quiet(decompose, tensor)
        assert (d.drag >= 0).all() and (d.mismatch_share >= 0).all()
        assert abs(float(d.shortfall_share.sum()) - (1 - reference)) < TOL
        assert abs(float(d.mismatch_share.sum()) - float(d.marginal_mismatch)) < TOL
        np.testing.assert_allclose(d.shortfall_share, d.drag + d.mismatch_share, atol=TOL)


@pytest.mark.parametrize("counts", [[[10, 40], [0, 50]], [[0, 90], [0, 10]], [[3, 1], [7, 9]]])
def test_two_classes_have_no_mismatch_however_biased(counts):
    # a_1 = a_2 = p_1 p_2 and b_1 = b_2 = t_1 t_2, so u = v = (1/sqrt 2, 1/sqrt 2) (proof in
    # docs/decomposition.md); R_K of [[10, 40], [0, 50]] is sklearn's MCC 1/3 on expanded labels.
    t = fc.confusion_tensor(counts, ["x", "y"])
    d = quiet(decompose, t)
    truth, pred = expand_counts(np.array(counts))
    reference = quiet(matthews_corrcoef, truth, pred)
    assert abs(float(d.shortfall_share.sum()) - (1 - reference)) < TOL
    if reference != 0 or np.count_nonzero(np.sum(counts, axis=0)) == 2:
        assert float(d.marginal_mismatch) < TOL


def test_undefined_rk_spreads_the_shortfall_by_margin_gap():
    # All predictions in one class: R_K is 0/0, 0 under "zero"; the shortfall 1 goes to the
    # classes whose predicted and actual counts differ, in proportion to |p_k - t_k|.
    d = quiet(decompose, fc.confusion_tensor([[0, 6, 0], [0, 4, 0], [0, 2, 0]], ["a", "b", "c"]))
    np.testing.assert_allclose(d.mismatch_share.values, [6 / 16, 8 / 16, 2 / 16], atol=TOL)


def test_flags_name_what_each_class_does_wrong():
    # a: never predicted; b: swallows the others (9 of the 11 others); c: never predicted right;
    # d: predicted but absent from truth.
    t = fc.confusion_tensor([[0, 5, 1, 0], [0, 4, 0, 0], [0, 4, 0, 1], [0, 0, 0, 0]],
                            ["a", "b", "c", "d"])
    words = [flag_words(b) for b in class_flags(t).values]
    assert words == [["never predicted"], ["swallows other classes"],
                     ["never predicted right"], ["absent from truth"]]
    assert set(FLAGS) == {w for ws in words for w in ws}


def test_flagged_classes_are_listed_beyond_top_and_named_in_warnings():
    counts = np.diag([20, 20, 20, 20])
    counts[3] = [0, 20, 0, 0]  # "d" never predicted
    ev = quiet(evaluate, fc.confusion_tensor(counts, ["a", "b", "c", "d"]))
    assert any(w.startswith("never predicted: class 'd'") for w in ev.warnings)
    rows = {r["class"]: r for r in json.loads(render(ev, "json"))["per_class"]}
    assert rows["d"]["flags"] == ["never predicted"]
    assert set(rows["d"]) >= {"drag", "mismatch_share", "shortfall_share"}
    listed = [row[0] for row in class_table(ev, top=1).rows]
    assert "d" in listed and listed[0] == ev.ranked()["class"].values[0]


def test_digits_with_every_eight_predicted_as_one_ranks_eight_near_the_top():
    # Real data: scikit-learn's digits, LogisticRegression, 5-fold cross_val_predict; then every
    # "8" predicted as "1". The class table ranks by shortfall share; "8" must be among the top
    # three and flagged "never predicted".
    from sklearn.datasets import load_digits
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import cross_val_predict

    x, y = load_digits(return_X_y=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pred = cross_val_predict(LogisticRegression(max_iter=3000), x / 16.0, y, cv=5)
    pred = np.where(pred == 8, 1, pred)
    ev = quiet(evaluate, fc.tally(y, pred))
    ranked = ev.ranked()
    assert 8 in ranked["class"].values[:3].tolist()
    assert flag_words(int(ranked["flags"].sel({"class": 8}))) == ["never predicted"]
    d = ev.per_class
    truth_rk = quiet(matthews_corrcoef, y, pred)
    assert abs(float(d["shortfall_share"].sum()) - (1 - truth_rk)) < TOL

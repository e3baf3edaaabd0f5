"""Prevalence shift: identities and the duplicated-samples construction."""

import numpy as np
import pytest
from sklearn.metrics import confusion_matrix, matthews_corrcoef, precision_score, recall_score

from foldcorr import metrics as m
from foldcorr.errors import InvalidInputError
from foldcorr.analysis.shift import shift_prevalence, shifted_figures, target_prevalence
from foldcorr.tensor import confusion_tensor, tally


def _tensor(seed=0):
    rng = np.random.default_rng(seed)
    truth = rng.choice(["cod", "hake", "ling"], size=400, p=[0.6, 0.3, 0.1])
    noise = rng.random(400) < 0.3
    pred = np.where(noise, rng.choice(["cod", "hake", "ling"], size=400), truth)
    return truth, pred


def test_observed_prevalence_changes_nothing():
    # target = observed prevalence: C' = C (identity of the reweighting, DESIGN.md formula)
    truth, pred = _tensor()
    t = tally(truth, pred)
    observed = dict(zip(*np.unique(truth, return_counts=True)))
    target = {k: v / len(truth) for k, v in observed.items()}
    np.testing.assert_allclose(shift_prevalence(t, target).values, t.values)
    r = shifted_figures(t, target)
    assert r.rk == pytest.approx(float(m.rk(t)), abs=1e-12)


@pytest.mark.parametrize("repeat", [2, 5])
def test_duplicated_samples_match_the_reweighting(repeat):
    # Repeating every sample of class "ling" `repeat` times is exactly a label shift: the
    # reweighted tensor equals the duplicated data's tensor up to one global factor, and the
    # figures equal sklearn's on the duplicated samples (sklearn.metrics.matthews_corrcoef,
    # precision_score, recall_score)
    truth, pred = _tensor(1)
    keep = np.repeat(np.arange(len(truth)), np.where(truth == "ling", repeat, 1))
    dup_t, dup_p = truth[keep], pred[keep]
    classes = ["cod", "hake", "ling"]
    dup = confusion_matrix(dup_t, dup_p, labels=classes)
    target = {c: float((dup_t == c).mean()) for c in classes}
    shifted = shift_prevalence(tally(truth, pred), target)
    np.testing.assert_allclose(shifted.values * (len(dup_t) / len(truth)), dup, rtol=1e-12)
    r = shifted_figures(tally(truth, pred), target)
    assert r.rk == pytest.approx(matthews_corrcoef(dup_t, dup_p), abs=1e-12)
    np.testing.assert_allclose(r.per_class["precision"].values,
                               precision_score(dup_t, dup_p, labels=classes, average=None))
    np.testing.assert_allclose(r.per_class["recall"].values,
                               recall_score(dup_t, dup_p, labels=classes, average=None))


def test_folds_are_pooled_first():
    truth, pred = _tensor(2)
    folds = np.arange(400) % 4
    a = shifted_figures(tally(truth, pred, folds=folds), "uniform")
    b = shifted_figures(tally(truth, pred), "uniform")
    assert a.rk == pytest.approx(b.rk, abs=1e-12)
    np.testing.assert_allclose(a.tensor.sum("predicted").values, [400 / 3] * 3)


def test_integer_classes_found_by_text():
    t = confusion_tensor([[5, 1], [2, 7]], [0, 1])
    assert target_prevalence(t, {"0": 0.25, "1": 0.75}).values.tolist() == [0.25, 0.75]


def test_bad_targets():
    t = confusion_tensor([[5, 1], [2, 7]], ["cod", "hake"])
    with pytest.raises(InvalidInputError, match="must sum to 1; got 0.9"):
        target_prevalence(t, {"cod": 0.5, "hake": 0.4})
    with pytest.raises(InvalidInputError, match=r"names the class 'tuna', which is not among"):
        target_prevalence(t, {"cod": 0.5, "tuna": 0.5})
    with pytest.raises(InvalidInputError, match=r"of class 'cod' must be a finite share >= 0"):
        target_prevalence(t, {"cod": -0.5, "hake": 1.5})
    with pytest.raises(InvalidInputError, match="must be 'uniform'"):
        target_prevalence(t, "even")
    empty = confusion_tensor([[5, 1], [0, 0]], ["cod", "hake"])
    with pytest.raises(InvalidInputError, match=r"class 'hake' has no samples \(it occurs only "
                                                r"in predictions\), so it cannot be rescaled to "
                                                r"the target share 0.5; give it share 0$"):
        shift_prevalence(empty, {"cod": 0.5, "hake": 0.5})
    folded = confusion_tensor([[[5, 1], [2, 3]], [[4, 0], [0, 0]]], ["cod", "hake"],
                              leading={"fold": [1, 2]})
    with pytest.raises(InvalidInputError, match=r"class 'hake' has no samples in fold=2, .*"
                                                r"give it share 0 or pool the folds first"):
        shift_prevalence(folded, "uniform")
    nothing = confusion_tensor([[0, 0], [0, 0]], ["cod", "hake"])
    with pytest.raises(InvalidInputError, match=r"'uniform' spreads over the classes with "
                                                r"samples, and this tensor has none"):
        target_prevalence(nothing, "uniform")


@pytest.mark.filterwarnings("ignore:y_pred contains classes not in y_true")
def test_uniform_spreads_over_the_classes_with_samples():
    # "ling" occurs only in predictions. Uniform over the classes with samples (cod, hake) is
    # the label shift made by repeating every hake sample until both are equally common, so
    # the figures equal sklearn's on the duplicated samples (sklearn.metrics.matthews_corrcoef,
    # recall_score, balanced_accuracy_score).
    from sklearn.metrics import balanced_accuracy_score

    rng = np.random.default_rng(3)
    truth = np.array(["cod"] * 300 + ["hake"] * 100)
    pred = np.where(rng.random(400) < 0.7, truth, rng.choice(["cod", "hake", "ling"], 400))
    t = tally(truth, pred)
    assert t.coords["actual"].values.tolist() == ["cod", "hake", "ling"]
    assert target_prevalence(t, "uniform").values.tolist() == [0.5, 0.5, 0.0]
    r = shifted_figures(t, "uniform")
    keep = np.repeat(np.arange(400), np.where(truth == "hake", 3, 1))
    dup_t, dup_p = truth[keep], pred[keep]
    assert r.rk == pytest.approx(matthews_corrcoef(dup_t, dup_p), abs=1e-12)
    np.testing.assert_allclose(r.per_class["recall"].values[:2],
                               recall_score(dup_t, dup_p, labels=["cod", "hake"], average=None))
    assert float(r.pooled["balanced_accuracy"]) == pytest.approx(
        balanced_accuracy_score(truth, pred), abs=1e-12)


def test_share_zero_leaves_a_class_out_with_undefined_recall():
    # A class given share 0 has no samples at the target: its recall is 0/0 (undefined, with a
    # warning), and balanced accuracy averages over the other classes only; it equals
    # sklearn.metrics.balanced_accuracy_score on the samples of those classes.
    from sklearn.metrics import balanced_accuracy_score

    truth, pred = _tensor(4)
    r = shifted_figures(tally(truth, pred), {"cod": 0.5, "hake": 0.5}, undefined="nan")
    recall = r.per_class["recall"].sel(**{"class": "ling"})
    assert np.isnan(recall)
    assert any("recall is undefined (0/0) at class='ling'" in w for w in r.warnings)
    keep = truth != "ling"
    expected = recall_score(truth[keep], pred[keep], labels=["cod", "hake"], average=None).mean()
    assert float(r.pooled["balanced_accuracy"]) == pytest.approx(expected, abs=1e-12)
    # Not the observed balanced accuracy over all three classes.
    assert balanced_accuracy_score(truth, pred) != pytest.approx(expected, abs=1e-3)

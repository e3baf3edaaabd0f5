"""Class by fold and the orders of the class table (--rank-by).

Outside references: the one-vs-rest MCC of a class in a fold is
`sklearn.metrics.matthews_corrcoef` on "is the class" indicators of that fold's samples; recall
and precision orders follow `sklearn.metrics.recall_score` / `precision_score` with
`average=None`. Real data: scikit-learn's bundled digits (`load_digits`), logistic regression,
5-fold `cross_val_predict`, then every predicted 8 relabelled 1.
"""

import json
import warnings

import numpy as np
import pytest
from sklearn.metrics import matthews_corrcoef, precision_score, recall_score

import foldcorr as fc
from foldcorr.analysis.classfold import class_by_fold, move_spread
from foldcorr.cli import main
from foldcorr.evaluation import evaluate
from foldcorr.pipeline import ScoreOptions, evaluate_with
from foldcorr.report.classfold import class_fold_table

TOL = 1e-12


def quiet(f, *a, **k):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return f(*a, **k)


@pytest.fixture(scope="module")
def collapsed_digits():
    from sklearn.datasets import load_digits
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import KFold, cross_val_predict

    x, y = load_digits(return_X_y=True)
    cv = KFold(5, shuffle=True, random_state=0)
    folds = np.empty(len(y), dtype=int)
    for k, (_, test) in enumerate(cv.split(x)):
        folds[test] = k
    pred = quiet(cross_val_predict, LogisticRegression(max_iter=3000), x / 16.0, y, cv=cv)
    return y, np.where(pred == 8, 1, pred), folds


def test_class_by_fold_mcc_equals_sklearn_per_fold(collapsed_digits):
    y, pred, folds = collapsed_digits
    cf = quiet(class_by_fold, fc.tally(y, pred, folds=folds))
    for f in range(5):
        keep = folds == f
        for k in range(10):
            ref = quiet(matthews_corrcoef, y[keep] == k, pred[keep] == k)  # 0.0 when undefined
            assert abs(float(cf.mcc.sel(fold=f, **{"class": k})) - ref) < TOL
        shares = cf.shortfall_share.sel(fold=f)
        assert abs(float(shares.sum()) - (1 - matthews_corrcoef(y[keep], pred[keep]))) < 1e-9


def test_collapsed_eight_ranks_top_three_in_every_fold_and_is_steady(collapsed_digits):
    y, pred, folds = collapsed_digits
    ev = quiet(evaluate, fc.tally(y, pred, folds=folds))
    assert 8 in ev.ranked()["class"].values[:3].tolist()
    cf = ev.per_class_fold
    assert int(cf.rank_worst.sel({"class": 8})) <= 3
    assert not bool(cf.moves.sel({"class": 8}))
    table = class_fold_table(ev, top=3)
    assert [row[0] for row in table.rows] == ev.ranked()["class"].values[:3].tolist()
    assert len(table.columns) == 1 + 5 + 1


def test_moves_marks_a_class_whose_rank_jumps():
    # class "c" is perfect in fold 1 and the worst class in fold 2; 8 classes: spread >= 3
    classes = list("abcdefgh")
    y = classes * 4
    fold1 = [c if c != "a" else "b" for c in classes] * 2
    fold2 = [c if c != "c" else "d" for c in classes] * 2
    t = fc.tally(y, fold1 + fold2, folds=[1] * 16 + [2] * 16)
    cf = quiet(class_by_fold, t)
    assert move_spread(8) == 3
    assert bool(cf.moves.sel({"class": "c"})) and not bool(cf.moves.sel({"class": "h"}))


def test_rank_by_orders_follow_sklearn():
    rng = np.random.default_rng(0)
    y = rng.integers(0, 6, 500)
    pred = np.where(rng.random(500) < 0.4, rng.integers(0, 6, 500), y)
    ev = evaluate(fc.tally(y, pred))
    recall = recall_score(y, pred, average=None)
    precision = precision_score(y, pred, average=None)
    mcc = [matthews_corrcoef(y == k, pred == k) for k in range(6)]
    assert ev.ranked("recall")["class"].values.tolist() == np.argsort(recall, kind="stable").tolist()
    assert ev.ranked("precision")["class"].values.tolist() == np.argsort(precision,
                                                                          kind="stable").tolist()
    assert ev.ranked("mcc")["class"].values.tolist() == np.argsort(mcc, kind="stable").tolist()
    gains = evaluate_with(fc.tally(y, pred), ScoreOptions(rank_by="gain"))
    ranked = gains.ranked()
    assert (np.diff(ranked["class"].values) != 0).all()
    fix_both = gains.extras["repair"].per_class["gain_fix_both"].sel({"class": ranked["class"]})
    assert (np.diff(fix_both.values) <= 0).all()
    # without the repair analysis, the gains are computed on demand and agree
    assert ev.ranked("gain")["class"].values.tolist() == ranked["class"].values.tolist()


def test_rank_by_on_the_command_line(tmp_path, capsys, collapsed_digits):
    import pandas as pd

    y, pred, folds = collapsed_digits
    path = tmp_path / "p.csv"
    pd.DataFrame({"actual": y, "predicted": pred, "fold": folds}).to_csv(path, index=False)
    assert main(["score", str(path), "--rank-by", "recall", "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    recalls = [row["recall"] for row in doc["per_class"]]
    assert recalls == sorted(recalls) and doc["per_class"][0]["class"] == "8"  # CSV labels stay text
    assert [e["class"] for e in doc["per_class_fold"]] == [e["class"] for e in doc["per_class"]]
    assert main(["score", str(path), "--rank-by", "mcc"]) == 0
    out = capsys.readouterr().out
    assert "Classes by MCC, lowest first" in out and "Per fold: the first 10 classes" in out
    assert main(["score", str(path), "--rank-by", "nope"]) == 2
    assert "--rank-by" in capsys.readouterr().err


def test_rank_by_gain_is_refused_for_labels():
    t = fc.multilabel_tally([[1, 0], [0, 1], [1, 1]], [[1, 0], [1, 1], [0, 1]], labels=["x", "y"])
    with pytest.raises(fc.OptionError, match="`rank_by` 'gain' applies to classes"):
        evaluate(t, rank_by="gain")
    assert evaluate(t, rank_by="mcc").ranked()["label"].values.tolist() == ["x", "y"]

"""`foldcorr compare` with three or more models, on real data.

Real data: scikit-learn's bundled digits (`sklearn.datasets.load_digits`), four scikit-learn
classifiers, 5-fold `cross_val_predict`. Each model's R_K is checked against
`sklearn.metrics.matthews_corrcoef` (the reference library).
"""

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import matthews_corrcoef
from sklearn.model_selection import KFold, cross_val_predict
from sklearn.naive_bayes import GaussianNB
from sklearn.neighbors import KNeighborsClassifier
from sklearn.tree import DecisionTreeClassifier

from foldcorr.cli import main

MODELS = {
    "logistic": LogisticRegression(max_iter=300),
    "knn": KNeighborsClassifier(3),
    "bayes": GaussianNB(),
    "tree": DecisionTreeClassifier(random_state=0),
}


@pytest.fixture(scope="module")
def digits_predictions():
    X, y = load_digits(return_X_y=True)
    cv = KFold(5, shuffle=True, random_state=0)
    folds = np.empty(len(y), dtype=int)
    for k, (_, test) in enumerate(cv.split(X)):
        folds[test] = k
    frame = pd.DataFrame({"image": np.arange(len(y)), "actual": y, "fold": folds})
    for name, model in MODELS.items():
        frame[name] = cross_val_predict(model, X, y, cv=cv)
    return frame


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_many_models_of_one_table_ranked_with_sklearn_rk(digits_predictions, tmp_path, capsys):
    path = tmp_path / "digits.csv"
    digits_predictions.to_csv(path, index=False)
    code, out, err = run(capsys, "compare", path, "--models", ",".join(MODELS),
                         "--resamples", "200", "--permutations", "200", "--seed", "3",
                         "--format", "json")
    assert code == 0, err
    doc = json.loads(out)
    assert doc["schema"] == "foldcorr.compare/2" and "holm" in doc["adjustment"]
    expected = {m: matthews_corrcoef(digits_predictions["actual"], digits_predictions[m])
                for m in MODELS}  # sklearn
    got = {row["model"]: row["rk"] for row in doc["models"]}
    assert got == pytest.approx(expected, abs=1e-12)
    assert [row["model"] for row in doc["models"]] == sorted(expected, key=expected.get,
                                                                reverse=True)
    assert doc["best"] == max(expected, key=expected.get)
    assert len(doc["per_class"]) == 10 and len(doc["folds"]) == 5


def test_one_table_per_model_joined_on_ids_gives_the_same_ranking(digits_predictions, tmp_path,
                                                                  capsys):
    paths = []
    shuffled = digits_predictions.sample(frac=1.0, random_state=1)
    for i, name in enumerate(MODELS):
        part = (digits_predictions if i == 0 else shuffled)[["image", "actual", "fold", name]]
        path = tmp_path / f"{name}.csv"
        part.rename(columns={name: "predicted"}).to_csv(path, index=False)
        paths.append(path)
    code, out, err = run(capsys, "compare", *paths, "--id", "image", "--resamples", "200",
                         "--seed", "3", "--format", "json")
    assert code == 0, err
    rk = {row["model"]: row["rk"] for row in json.loads(out)["models"]}
    for name in MODELS:
        assert rk[name] == pytest.approx(
            matthews_corrcoef(digits_predictions["actual"], digits_predictions[name]))  # sklearn


def test_text_report_names_the_best_and_the_adjustment(digits_predictions, tmp_path, capsys):
    path = tmp_path / "digits.csv"
    digits_predictions.to_csv(path, index=False)
    code, out, _ = run(capsys, "compare", path, "--models", "logistic,knn,tree",
                       "--resamples", "200", "--seed", "1")
    assert code == 0
    assert "Models ranked by R_K" in out and "Class winners" in out and "holm" in out.lower()


def test_two_models_by_name_keep_the_paired_report(digits_predictions, tmp_path, capsys):
    path = tmp_path / "digits.csv"
    digits_predictions.to_csv(path, index=False)
    code, out, _ = run(capsys, "compare", path, "--models", "knn,tree", "--resamples", "200",
                       "--seed", "1", "--format", "json")
    assert code == 0 and json.loads(out)["schema"] == "foldcorr.compare/1"


@pytest.mark.parametrize("argv, message", [
    (["--models", "knn"], "name two or more different prediction columns"),
    (["--models", "knn,knn,tree"], "name two or more different prediction columns"),
    (["--models", "knn,tree,bayes", "--pred-a", "knn"], "`--pred-a` applies to two models"),
    (["--models", "knn,nope,tree"], "column 'nope' not found"),
])
def test_bad_many_model_requests_exit_2_in_one_line(digits_predictions, tmp_path, capsys, argv,
                                                    message):
    path = tmp_path / "digits.csv"
    digits_predictions.head(60).to_csv(path, index=False)
    code, out, err = run(capsys, "compare", path, *argv)
    assert code == 2 and out == "" and err.count("\n") == 1 and message in err

"""The worked notebook in docs/examples, run headlessly in a real Jupyter kernel.

Its figures are checked against scikit-learn computed here, outside the notebook: R_K is the
multiclass Matthews correlation, so ``sklearn.metrics.matthews_corrcoef`` of the same predictions
is the reference.
"""

import ast
import re
from pathlib import Path

import numpy as np
import pytest
from sklearn.datasets import load_digits, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import matthews_corrcoef
from sklearn.model_selection import StratifiedKFold, cross_val_predict, train_test_split
from sklearn.neighbors import KNeighborsClassifier
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.tree import DecisionTreeClassifier

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")
pytest.importorskip("ipykernel")

NOTEBOOK = Path(__file__).resolve().parents[1] / "docs" / "examples" / "digits-and-wine.ipynb"


@pytest.fixture(scope="module")
def outputs(tmp_path_factory):
    """Each tagged cell's outputs after running the whole notebook in a fresh kernel."""
    nb = nbformat.read(NOTEBOOK, as_version=4)
    workdir = tmp_path_factory.mktemp("notebook")
    nbclient.NotebookClient(nb, timeout=180, kernel_name="python3",
                            resources={"metadata": {"path": str(workdir)}}).execute()
    return {tag: cell.outputs for cell in nb.cells if cell.cell_type == "code"
            for tag in cell.metadata.get("tags", [])}


def _data(outputs, tag, mime):
    found = [o["data"][mime] for o in outputs[tag] if mime in o.get("data", {})]
    assert found, f"cell {tag!r} shows no {mime}"
    return found[0]


def _digits_model():
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))


def test_no_cell_fails_and_no_cell_writes_to_stderr(outputs):
    assert not [o for outs in outputs.values() for o in outs if o["output_type"] == "error"]
    streams = [o for outs in outputs.values() for o in outs if o["output_type"] == "stream"]
    assert not [o for o in streams if o["name"] == "stderr"]


def test_held_out_rk_equals_matthews_corrcoef(outputs):
    X, y = load_digits(return_X_y=True)
    X_train, X_test, y_train, y_test = train_test_split(X, y, stratify=y, random_state=0)
    pred = _digits_model().fit(X_train, y_train).predict(X_test)
    mcc = matthews_corrcoef(y_test, pred)  # reference: sklearn.metrics
    shown_rk, shown_mcc = ast.literal_eval(_data(outputs, "heldout-rk", "text/plain"))
    assert shown_rk == pytest.approx(mcc, abs=1e-12)
    assert shown_mcc == pytest.approx(mcc, abs=1e-12)
    assert f"rk={mcc:.4f}" in _data(outputs, "heldout-evaluation", "text/plain")
    assert "<table" in _data(outputs, "heldout-evaluation", "text/html")


def test_cross_validated_figures_equal_matthews_corrcoef_per_fold(outputs):
    X, y = load_digits(return_X_y=True)
    cv = StratifiedKFold(5)  # what cv=5 means for a classifier in scikit-learn
    pred = cross_val_predict(_digits_model(), X, y, cv=cv)
    per_fold = [matthews_corrcoef(y[test], pred[test]) for _, test in cv.split(X, y)]
    shown = _data(outputs, "cv-dict", "text/plain")
    figure = {key: float(value) for key, value in
              re.findall(r"'(\w+)': ([-+0-9.e]+|nan)", shown)}
    assert figure["rk"] == pytest.approx(matthews_corrcoef(y, pred), abs=1e-12)
    assert figure["fold_mean_rk"] == pytest.approx(np.mean(per_fold), abs=1e-12)
    assert figure["fold_sd_rk"] == pytest.approx(np.std(per_fold, ddof=1), abs=1e-12)
    assert figure["n"] == len(y)
    assert "<table" in _data(outputs, "cv-evaluation", "text/html")
    assert "<table" in _data(outputs, "cv-folds", "text/html")


def test_plots_show_as_images(outputs):
    for tag in ("plot-budget", "plot-folds"):
        assert len(_data(outputs, tag, "image/png")) > 1000


def test_estimator_comparison_equals_matthews_corrcoef_of_cross_val_predict(outputs):
    X, y = load_wine(return_X_y=True)
    models = {
        "logistic": make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000)),
        "knn": make_pipeline(StandardScaler(), KNeighborsClassifier()),
        "tree": DecisionTreeClassifier(random_state=0),
    }
    shown = ast.literal_eval(_data(outputs, "wine-rk", "text/plain"))
    assert list(shown) == sorted(shown, key=lambda m: -shown[m])  # best first
    for name, model in models.items():
        mcc = matthews_corrcoef(y, cross_val_predict(model, X, y, cv=5))  # sklearn
        assert shown[name] == pytest.approx(mcc, abs=1e-12)
    assert "<table" in _data(outputs, "wine-comparison", "text/html")

"""Results in a notebook: short reprs, HTML fragments, tidy frames and flat dicts."""

from html.parser import HTMLParser

import numpy as np
import pytest
from sklearn.datasets import load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import accuracy_score, balanced_accuracy_score, matthews_corrcoef
from sklearn.model_selection import StratifiedKFold, cross_val_predict

from foldcorr.analysis.folds import fold_statistics
from foldcorr.analysis.repair import repair_analysis
from foldcorr.analysis.uncertainty import bootstrap
from foldcorr.errors import OptionError
from foldcorr.evaluation import evaluate
from foldcorr.report import render
from foldcorr.tensor import tally


@pytest.fixture(scope="module")
def digits():
    x, y = load_digits(return_X_y=True)
    cv = StratifiedKFold(5, shuffle=True, random_state=0)
    pred = cross_val_predict(LogisticRegression(max_iter=2000), x, y, cv=cv)
    fold = np.empty(len(y), dtype=int)
    for i, (_, test) in enumerate(cv.split(x, y)):
        fold[test] = i
    return y, pred, fold, evaluate(tally(y, pred, folds=fold))


class _Tables(HTMLParser):
    """Rows of every table body, by the id of its table (html.parser, the standard library)."""

    def __init__(self):
        super().__init__()
        self.rows, self.table, self.in_body = {}, None, False

    def handle_starttag(self, tag, attrs):
        if tag == "table":
            self.table = dict(attrs).get("id")
            self.rows[self.table] = 0
        elif tag == "tbody":
            self.in_body = True
        elif tag == "tr" and self.in_body:
            self.rows[self.table] += 1

    def handle_endtag(self, tag):
        if tag == "tbody":
            self.in_body = False


def test_dict_equals_scikit_learn(digits):
    y, pred, fold, ev = digits
    d = ev.to_dict()
    # reference: sklearn.metrics on the same predictions (R_K is multiclass MCC)
    assert d["rk"] == pytest.approx(matthews_corrcoef(y, pred))
    assert d["accuracy"] == pytest.approx(accuracy_score(y, pred))
    assert d["balanced_accuracy"] == pytest.approx(balanced_accuracy_score(y, pred))
    per_fold = [matthews_corrcoef(y[fold == i], pred[fold == i]) for i in range(5)]
    assert d["fold_mean_rk"] == pytest.approx(np.mean(per_fold))
    assert d["fold_sd_rk"] == pytest.approx(np.std(per_fold, ddof=1))
    assert all(isinstance(v, float) for v in d.values())


def test_frames_equal_scikit_learn(digits):
    y, pred, fold, ev = digits
    classes = ev.to_frame("class")
    assert len(classes) == 10
    for row in classes.itertuples():
        # reference: sklearn.metrics.matthews_corrcoef of one class against the rest
        assert row.mcc == pytest.approx(matthews_corrcoef(y == row._1, pred == row._1))
    folds = ev.to_frame("fold")
    assert folds["rk"].tolist() == pytest.approx(
        [matthews_corrcoef(y[fold == i], pred[fold == i]) for i in range(5)])
    cells = ev.to_frame("confusions")
    assert cells["count"].sum() == len(y)
    with pytest.raises(OptionError, match="`kind`"):
        ev.to_frame("label")
    with pytest.raises(OptionError, match="`kind`"):
        ev.to_frame("cells")


def test_html_fragment_has_one_row_per_class(digits):
    *_, ev = digits
    parser = _Tables()
    parser.feed(ev._repr_html_())
    (rows,) = [n for table, n in parser.rows.items() if table.startswith("classes-by-")]
    assert rows == 10


def test_text_outputs_are_what_the_command_line_writes(digits):
    *_, ev = digits
    assert ev.to_json() == render(ev, "json")
    assert ev.to_markdown() == render(ev, "markdown")
    assert ev.to_html() == render(ev, "html")


def test_reprs_are_short(digits):
    *_, ev = digits
    t = ev.tensor
    results = [ev, bootstrap(t, n_resamples=200, seed=0), repair_analysis(t), fold_statistics(t)]
    for result in results:
        text = repr(result)
        assert text.startswith(type(result).__name__) and len(text.splitlines()) <= 4
        assert "<table" in result._repr_html_()

"""Arrow-backed text labels are coded by Arrow and count exactly as plain text does.

Checked against ``sklearn.metrics.confusion_matrix`` (the reference library) on the same labels.
"""

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from sklearn.metrics import confusion_matrix

import foldcorr as fc
from foldcorr.errors import InvalidInputError


def _labels(n=2_000, k=40, seed=3):
    rng = np.random.default_rng(seed)
    names = np.array([f"taxon {i:02d}" for i in range(k)] + ["01", "1", " 1"], dtype=object)
    truth = names[rng.integers(0, len(names), n)]
    pred = np.where(rng.random(n) < 0.7, truth, names[rng.integers(0, len(names), n)])
    return truth, pred


@pytest.mark.parametrize("dtype", [pd.ArrowDtype(pa.string()), pd.ArrowDtype(pa.large_string()),
                                   "string[pyarrow]"])
def test_arrow_text_counts_equal_sklearn_and_plain_text(dtype):
    truth, pred = _labels()
    t = fc.tally(pd.Series(truth, dtype=dtype), pd.Series(pred, dtype=dtype),
                 folds=np.arange(len(truth)) % 3)
    plain = fc.tally(truth, pred, folds=np.arange(len(truth)) % 3)
    assert t.coords["actual"].values.tolist() == plain.coords["actual"].values.tolist()
    assert (t.values == plain.values).all()
    labels = t.coords["actual"].values.tolist()
    assert "01" in labels and "1" in labels and " 1" in labels  # text kept as typed
    ref = confusion_matrix(truth, pred, labels=labels)
    assert (t.sum("fold").values == ref).all()


def test_arrow_text_mixes_with_pyarrow_arrays():
    truth, pred = _labels(seed=4)
    t = fc.tally(pa.chunked_array([truth[:500].tolist(), truth[500:].tolist()]),
                 pd.Series(pred, dtype=pd.ArrowDtype(pa.string())))
    labels = t.coords["actual"].values.tolist()
    assert (t.values == confusion_matrix(truth, pred, labels=labels)).all()


def test_missing_arrow_text_label_is_refused_naming_the_row():
    truth = pd.Series(["a", None, "b"], dtype=pd.ArrowDtype(pa.string()))
    pred = pd.Series(["a", "b", "b"], dtype=pd.ArrowDtype(pa.string()))
    with pytest.raises(InvalidInputError, match="row 2"):
        fc.tally(truth, pred)

"""Hypothesis strategies shared by the tests."""

import numpy as np
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp


@st.composite
def label_arrays(draw, *, max_classes=6, max_size=60, min_size=1, folds=False, weights=False):
    """Truth and prediction labels (some classes only on one side), optional folds and weights."""
    n = draw(st.integers(min_size, max_size))
    k = draw(st.integers(1, max_classes))
    truth = np.array(draw(st.lists(st.integers(0, k - 1), min_size=n, max_size=n)))
    pred = np.array(draw(st.lists(st.integers(0, k), min_size=n, max_size=n)))  # k: only predicted
    out = {"truth": truth, "pred": pred}
    if folds:
        out["folds"] = np.array(draw(st.lists(st.integers(0, 3), min_size=n, max_size=n)))
    if weights:
        out["weights"] = np.array(
            draw(st.lists(st.floats(0.1, 10.0, allow_nan=False), min_size=n, max_size=n)))
    return out


def count_matrices(max_k=6, max_count=50):
    """Square count matrices with at least one count."""
    return st.integers(1, max_k).flatmap(
        lambda k: hnp.arrays(np.int64, (k, k), elements=st.integers(0, max_count))
    ).filter(lambda c: c.sum() > 0)

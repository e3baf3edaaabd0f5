"""R_K without overflow, underflow or cancellation: scaled sums and an exact numerator.

The reference values are computed here with :class:`fractions.Fraction` from the
definition of R_K (Gorodkin 2004): R_K = (c s - sum t_k p_k) / sqrt((s^2 - sum p_k^2)
(s^2 - sum t_k^2)); for the matrices below the square root is a whole square, so the
reference is an exact rational number.
"""

import math
import warnings
from fractions import Fraction

import numpy as np
import pytest

from foldcorr.decomposition import decompose
from foldcorr.metrics import ovr_mcc, rk
from foldcorr.tensor import confusion_tensor, tally


def exact_rk(cells):
    """R_K of a matrix of Python integers as a Fraction, when its denominator is a square."""
    k = len(cells)
    s = sum(map(sum, cells))
    c = sum(cells[i][i] for i in range(k))
    t = [sum(row) for row in cells]
    p = [sum(cells[i][j] for i in range(k)) for j in range(k)]
    num = c * s - sum(a * b for a, b in zip(t, p))
    dp, dt = s * s - sum(x * x for x in p), s * s - sum(x * x for x in t)
    root = math.isqrt(dp * dt)
    assert root * root == dp * dt
    return Fraction(num, root)


def test_exact_reference_is_one_half():
    assert exact_rk([[3, 1], [1, 3]]) == Fraction(1, 2)


@pytest.mark.parametrize("weight", [1e300, 1e-300, 1e200, 1e-200])
def test_extreme_weights_keep_rk_exact(weight):
    # every sample weighs `weight`: R_K is scale-free, so the exact value stays 1/2
    truth = ["a"] * 4 + ["b"] * 4
    pred = ["a", "a", "a", "b", "a", "b", "b", "b"]
    t = tally(truth, pred, weights=np.full(8, weight))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        value = float(rk(t))
        per_class = ovr_mcc(t).values.tolist()
        parts = decompose(t)
    assert value == pytest.approx(float(Fraction(1, 2)), rel=1e-12)
    assert per_class == pytest.approx([0.5, 0.5], rel=1e-12)
    assert float(parts.contribution.sum()) == pytest.approx(0.5, rel=1e-12)


def test_near_cancelling_large_counts_are_exact():
    # counts of about 2e18: c s and sum t_k p_k agree to 18 digits
    big = 2 * 10**18
    cells = [[big + 4, big], [big, big]]
    reference = exact_rk(cells)
    assert float(reference) == pytest.approx(5e-19, rel=1e-15)
    t = confusion_tensor(np.array(cells, dtype=np.int64), ["a", "b"])
    assert float(rk(t)) == pytest.approx(float(reference), rel=1e-12)


def test_exact_numerator_over_folds_and_sparse_backing():
    big = 2 * 10**18
    cells = np.array([[[big + 4, big], [big, big]], [[3, 1], [1, 3]]], dtype=np.int64)
    t = confusion_tensor(cells, ["a", "b"], leading={"fold": [0, 1]})
    expected = [float(exact_rk(m.tolist())) for m in cells]
    assert rk(t).values.tolist() == pytest.approx(expected, rel=1e-12)
    sparse = pytest.importorskip("sparse")
    sparse_t = t.copy(data=sparse.COO.from_numpy(cells))
    assert rk(sparse_t).values.tolist() == pytest.approx(expected, rel=1e-12)


def test_ordinary_counts_unchanged():
    t = confusion_tensor([[6, 2], [1, 3]], ["pos", "neg"])
    assert round(float(rk(t)), 6) == 0.478091

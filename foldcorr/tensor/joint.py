"""The joint tensor kind: two models' predictions of the same samples, counted together.

A joint tensor counts samples by (actual, prediction of model A, prediction of
model B), with dims ``([fold,] actual, predicted_a, predicted_b)`` and one
class coordinate on the three class dims. Each model's confusion tensor is a
margin of it. Nothing here computes a metric.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
import xarray as xr

from foldcorr.errors import InvalidTensorError
from foldcorr.tensor.backing import DENSE_CELL_LIMIT, is_sparse, sum_cells
from foldcorr.tensor.counting import tally_columns
from foldcorr.tensor.dims import ACTUAL, COUNT, FOLD, PREDICTED, validate_tensor

if TYPE_CHECKING:
    from collections.abc import Sequence

    from numpy.typing import ArrayLike

__all__ = [
    "PREDICTED_A",
    "PREDICTED_B",
    "JOINT_DIMS",
    "joint_tally",
    "validate_joint",
    "model_tensors",
]

#: Dim of model A's predictions.
PREDICTED_A = "predicted_a"
#: Dim of model B's predictions.
PREDICTED_B = "predicted_b"
#: The three class dims of a joint tensor, in order.
JOINT_DIMS = (ACTUAL, PREDICTED_A, PREDICTED_B)


def joint_tally(truth: ArrayLike, pred_a: ArrayLike, pred_b: ArrayLike, *,
                folds: ArrayLike | None = None, classes: ArrayLike | None = None,
                names: Sequence[str] = ("truth", "pred_a", "pred_b")) -> xr.DataArray:
    """Count (actual, prediction of A, prediction of B) triples into a joint tensor.

    Parameters
    ----------
    truth, pred_a, pred_b : array_like
        One label per sample; the two predictions are of the same samples.
    folds : array_like, optional
        One fold label per sample; adds a leading dim ``fold``.
    classes : sequence, optional
        Fixed class order; labels outside it are an error. Without it, every
        label seen in any of the three arrays, sorted.
    names : tuple of 3 str, default ("truth", "pred_a", "pred_b")
        Names of ``truth``, ``pred_a`` and ``pred_b`` used in messages, e.g.
        the table's column names.

    Returns
    -------
    xarray.DataArray
        Int64 counts named ``count``, dims ``([fold,] actual, predicted_a,
        predicted_b)``, the same class coordinate on the three class dims.

    Raises
    ------
    InvalidInputError
        On arrays of different length, missing labels or labels outside
        ``classes``.

    Notes
    -----
    Counted by :func:`foldcorr.tensor.tally_columns`: one factorisation codes
    the three columns over one class list, and one ``numpy.bincount`` over
    ``((fold K + actual) K + a) K + b`` counts them.
    The tensor is dense while folds x K^3 stays within
    :data:`~foldcorr.tensor.DENSE_CELL_LIMIT` cells; above it only the joint
    cells seen are stored (a ``sparse.COO``, at most one per sample).

    Examples
    --------
    >>> j = joint_tally(["x", "x", "y"], ["x", "y", "y"], ["x", "x", "x"])
    >>> j.dims
    ('actual', 'predicted_a', 'predicted_b')
    >>> int(j.sel(actual="x", predicted_a="y", predicted_b="x"))
    1
    """
    columns = {ACTUAL: (names[0], truth), PREDICTED_A: (names[1], pred_a),
               PREDICTED_B: (names[2], pred_b)}
    leading = {} if folds is None else {FOLD: folds}
    return tally_columns(columns, leading=leading, classes=classes, sparse_above=DENSE_CELL_LIMIT)


def validate_joint(j) -> xr.DataArray:
    """Check a joint tensor and return it in normal form.

    Normal form: dims ``([fold,] actual, predicted_a, predicted_b)``, the same
    class coordinate on the three class dims, non-negative counts (int64, or
    float64 for sums of weights, as :func:`foldcorr.tensor.validate_tensor`
    keeps them). Resampling a joint tensor also needs whole counts; the
    paired comparison checks that.

    Raises
    ------
    InvalidTensorError
        On other dims, differing class coordinates, or counts that are
        negative or not finite.

    Examples
    --------
    >>> j = joint_tally([0, 1], [0, 1], [1, 1], folds=["f1", "f2"])
    >>> validate_joint(j).dims
    ('fold', 'actual', 'predicted_a', 'predicted_b')
    """
    if not isinstance(j, xr.DataArray):
        raise InvalidTensorError(
            f"a joint tensor must be an xarray.DataArray; got {type(j).__name__!r}")
    missing = [d for d in JOINT_DIMS if d not in j.dims]
    other = [d for d in j.dims if d not in (*JOINT_DIMS, FOLD)]
    if missing or other:
        raise InvalidTensorError(
            f"a joint tensor has dims ([fold,] {', '.join(JOINT_DIMS)}); got {j.dims!r}")
    lead = [FOLD] if FOLD in j.dims else []
    j = j.transpose(*lead, *JOINT_DIMS)
    k = j.sizes[ACTUAL]
    if j.sizes[PREDICTED_A] != k or j.sizes[PREDICTED_B] != k:
        raise InvalidTensorError(
            f"the three class dims of a joint tensor must have one size; got {j.shape[-3:]!r}")
    ref = j.coords[ACTUAL].values if ACTUAL in j.coords else np.arange(k)
    for d in JOINT_DIMS:
        got = j.coords[d].values if d in j.coords else np.arange(k)
        if not np.array_equal(got, ref):
            raise InvalidTensorError(
                f"the class coordinates of {ACTUAL!r} and {d!r} differ: {ref.tolist()!r} "
                f"and {got.tolist()!r}")
    j = j.assign_coords({d: ref for d in JOINT_DIMS})
    values = j.data.data if is_sparse(j) else np.asarray(j.values)
    if not np.issubdtype(values.dtype, np.number) or (values < 0).any():
        raise InvalidTensorError("joint counts must be non-negative numbers")
    if not np.issubdtype(values.dtype, np.floating):
        j = j.copy(data=j.data.astype(np.int64, copy=False))
    elif not np.isfinite(values).all():
        raise InvalidTensorError("joint counts must be finite")
    return j.rename(COUNT)


def model_tensors(j: xr.DataArray) -> tuple[xr.DataArray, xr.DataArray]:
    """Each model's confusion tensor: the margins of the joint tensor.

    Examples
    --------
    >>> j = joint_tally(["x", "x", "y"], ["x", "y", "y"], ["x", "x", "x"])
    >>> a, b = model_tensors(j)
    >>> a.values.tolist(), b.values.tolist()
    ([[1, 1], [0, 1]], [[2, 0], [1, 0]])
    """
    j = validate_joint(j)
    a = sum_cells(j, PREDICTED_B).rename({PREDICTED_A: PREDICTED})
    b = sum_cells(j, PREDICTED_A).rename({PREDICTED_B: PREDICTED})
    return validate_tensor(a), validate_tensor(b)

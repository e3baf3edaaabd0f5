"""The analysis layer: when a class has too few samples to support an interval.

A per-class interval of a class with a handful of samples undercovers: in many
resamples the class is absent or has one or two samples, its one-vs-rest MCC
is then 0 by convention or jumps to an extreme, and the percentile interval
no longer brackets the true value at its level. A class with no misclassified
sample has the same trouble from the other side: every resample gives MCC 1
and the interval shrinks to the point; so does one with no sample predicted
right. The rule, derived from the simulation described in
``docs/uncertainty.md``: a class needs at least :data:`MIN_CLASS_SUPPORT`
samples in the truth, at least one of them predicted right and at least one
sample misclassified to or from it (pooled over folds) for its interval to be
shown; otherwise the interval is NaN and one warning names the classes. Nothing here
reads files, prints or draws randoms.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from foldcorr.tensor import ACTUAL, CLASS, PREDICTED, cell_sums, pool

__all__ = ["MIN_CLASS_SUPPORT", "thin_classes", "blank_thin_classes", "thin_note"]

#: Fewest samples of a class (in the truth, pooled over folds) for a per-class interval.
MIN_CLASS_SUPPORT = 3


def thin_classes(t: xr.DataArray, minimum: int = MIN_CLASS_SUPPORT) -> np.ndarray:
    """Mask over the classes of a confusion tensor too thin for an interval.

    A class is thin with fewer than ``minimum`` samples in the truth, with no
    sample of it predicted right, or with no sample misclassified to or from
    it (false negatives plus false positives is 0); counts pooled over every
    leading dim.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> thin_classes(tally([0] * 9 + [1] * 2 + [2] * 6, [0] * 8 + [2] * 3 + [2] * 6)).tolist()
    [False, True, False]
    >>> thin_classes(tally([0] * 6 + [1] * 6, [0] * 6 + [1] * 6)).tolist()
    [True, True]
    """
    lead = [d for d in t.dims if d not in (ACTUAL, PREDICTED)]
    correct, support, predicted = cell_sums(pool(t, lead))  # either backing
    return (support < minimum) | (correct < 1) | (support + predicted - 2 * correct < 1)


def thin_note(classes, mask: np.ndarray, what: str) -> tuple[str, ...]:
    """One note naming the classes whose interval was withheld (none when none were).

    Examples
    --------
    >>> thin_note(["a", "b", "c"], np.array([False, True, True]), "per-class intervals")[0]
    "per-class intervals: none for classes ['b', 'c'] (NaN): each has fewer than 3 samples in the truth, none predicted right or none misclassified, too few to support an interval"
    """
    if not mask.any():
        return ()
    names = [c for c, m in zip(classes, mask) if m]
    return (f"{what}: none for classes {names!r} (NaN): each has fewer than "
            f"{MIN_CLASS_SUPPORT} samples in the truth, none predicted right or none "
            "misclassified, too few to support an interval",)


def blank_thin_classes(values: xr.DataArray, mask: np.ndarray) -> xr.DataArray:
    """``values`` with NaN at the classes of ``mask`` (along dim ``class``), else unchanged.

    Examples
    --------
    >>> v = xr.DataArray([0.5, 0.7], dims="class", coords={"class": ["a", "b"]})
    >>> blank_thin_classes(v, np.array([False, True])).values.tolist()
    [0.5, nan]
    """
    if CLASS not in values.dims or not mask.any():
        return values
    keep = xr.DataArray(~mask, dims=CLASS, coords={CLASS: values.coords[CLASS].values})
    return values.where(keep)

r"""The analysis layer: whether the folds agree, and what the fold interval targets.

Fold statistics: the spread of per-fold R_K, pooled against averaged, with two
t intervals of the mean of per-fold R_K (the naive one and the Nadeau-Bengio
corrected one). Nothing here reads files, prints or draws randoms.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import xarray as xr

from foldcorr.analysis.resampling import check_level
from foldcorr.errors import InvalidTensorError, OptionError
from foldcorr.metrics import rk
from foldcorr.tensor import FOLD, validate_tensor

if TYPE_CHECKING:
    from collections.abc import Callable

__all__ = ["FoldStatistics", "fold_statistics", "FOLD_TARGET"]

#: What the fold intervals estimate.
FOLD_TARGET = (
    "the expected R_K of the learning procedure trained on n_train samples and tested on "
    "new data (averaged over training sets of that size), not the R_K of the one model "
    "trained on all the data"
)



@dataclass(frozen=True)
class FoldStatistics:
    """Spread of per-fold R_K, pooled against averaged, and two t intervals of the mean.

    Attributes
    ----------
    per_fold : xarray.DataArray
        The statistic of every fold, dim ``fold``.
    count : int
        Number of folds J.
    mean, sd, min, max : float
        Mean, sample standard deviation (ddof = 1), minimum and maximum of the
        per-fold values. ``mean`` is the averaged figure.
    pooled : float
        The statistic of the tensor summed over folds.
    gap : float
        ``pooled - mean``.
    level : float
        Level of the interval.
    test_train_ratio : float
        n_test / n_train used in the correction.
    corrected_se : float
        :math:`\\sqrt{(1/J + n_{test}/n_{train})\\, s^2}`.
    corrected_ci : tuple of float
        ``mean -/+ t_{(1+level)/2, J-1} * corrected_se``: the Nadeau-Bengio
        interval, the conservative option (derived for repeated random
        splits; on J-fold cross-validation it over-covers, see
        ``docs/uncertainty.md``).
    naive_ci : tuple of float
        The same with the uncorrected variance :math:`s^2 / J` (fold values
        taken as independent).
    naive_se : float
        :math:`s / \\sqrt J`.
    target : str
        What both intervals estimate, in words (:data:`FOLD_TARGET`).
    warnings : tuple of str
        A note when pooled and averaged differ by more than the fold spread
        explains, or when a fold's value is undefined.
    """

    per_fold: xr.DataArray
    count: int
    mean: float
    sd: float
    min: float
    max: float
    pooled: float
    gap: float
    level: float
    test_train_ratio: float
    corrected_se: float
    corrected_ci: tuple[float, float]
    naive_ci: tuple[float, float]
    warnings: tuple[str, ...] = field(default_factory=tuple)
    naive_se: float = float("nan")
    target: str = ""

    @property
    def averaged(self) -> float:
        """The mean of the per-fold values (alias of ``mean``)."""
        return self.mean

    def _repr_html_(self) -> str:
        from foldcorr.report.notebook import html_fragment  # rendering lives in the report layer

        return html_fragment(self)

    def __repr__(self) -> str:
        low, high = self.corrected_ci
        return (f"FoldStatistics({self.count} folds, mean={self.mean:.4f}, sd={self.sd:.4f}, "
                f"pooled={self.pooled:.4f})\n  corrected {self.level:.0%} interval "
                f"[{low:.4f}, {high:.4f}]")


def fold_statistics(t: xr.DataArray, statistic: Callable[..., xr.DataArray] = rk, *,
                    level: float = 0.95,
                    test_train_ratio: float | None = None) -> FoldStatistics:
    r"""Mean, spread and a Nadeau-Bengio corrected t interval of per-fold R_K.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor with a ``fold`` dim of at least two folds.
    statistic : callable, default :func:`foldcorr.metrics.rk`
        Tensor -> DataArray giving one value per fold.
    level : float, default 0.95
        Level of the t interval.
    test_train_ratio : float, optional
        n_test / n_train of one fold. Default ``1 / (J - 1)``, right for J-fold
        cross-validation where each fold is tested once and trained on the rest.

    Returns
    -------
    FoldStatistics

    Raises
    ------
    InvalidTensorError
        Without a ``fold`` dim, with fewer than two folds, or when the
        statistic does not give one value per fold.
    OptionError
        On a level outside (0, 1) or a ratio that is not positive.

    Notes
    -----
    With per-fold values :math:`r_1..r_J`, mean :math:`\bar r` and sample
    variance :math:`s^2`, the corrected variance of the mean is [1]_

    .. math:: \hat\sigma^2 = \left(\frac1J + \frac{n_{test}}{n_{train}}\right) s^2

    and the interval is :math:`\bar r \pm t_{(1+\ell)/2,\,J-1}\,\hat\sigma`.
    The naive interval uses :math:`s^2/J`. Both target :data:`FOLD_TARGET`.
    The correction was derived for repeated random train/test splits, where
    the overlap of training sets makes the fold values positively correlated;
    on J-fold cross-validation (disjoint test folds) it is conservative: in
    the simulation of ``docs/uncertainty.md`` (5-fold, N = 300) the 95%
    corrected interval covered 0.990 and the naive one 0.952. Report the
    naive interval, and the corrected one when a conservative bound is
    wanted. A warning is raised when
    :math:`|\text{pooled} - \bar r|` exceeds the naive half-width
    :math:`t_{(1+\ell)/2, J-1}\, s/\sqrt J`: pooled and averaged figures then
    differ by more than fold-to-fold noise explains (folds differ in class mix
    or in how the model behaves on them).

    References
    ----------
    .. [1] C. Nadeau, Y. Bengio, "Inference for the generalization error",
       Machine Learning 52 (2003) 239-281.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> t = tally([0, 1, 0, 1, 0, 1, 1, 0, 0, 1, 1, 0],
    ...           [0, 1, 0, 0, 0, 1, 1, 1, 0, 1, 1, 0], folds=[1, 1, 1, 1, 2, 2, 2, 2, 3, 3, 3, 3])
    >>> fs = fold_statistics(t)
    >>> fs.count, round(fs.mean, 4), fs.corrected_ci[0] < fs.mean < fs.corrected_ci[1]
    (3, 0.7182, True)
    """
    level = check_level(level)
    t = validate_tensor(t)
    if FOLD not in t.dims or t.sizes[FOLD] < 2:
        got = t.sizes.get(FOLD, 0) if FOLD in t.dims else "no fold dim"
        raise InvalidTensorError(
            f"fold statistics need a 'fold' dim with at least 2 folds; got {got!r}"
        )
    j = int(t.sizes[FOLD])
    if test_train_ratio is None:
        ratio = 1.0 / (j - 1)
    else:
        ok = isinstance(test_train_ratio, numbers.Real) and not isinstance(test_train_ratio, bool)
        if not ok or not (test_train_ratio > 0 and math.isfinite(test_train_ratio)):
            raise OptionError(
                f"`test_train_ratio` must be a positive number (n_test / n_train); "
                f"got {test_train_ratio!r}"
            )
        ratio = float(test_train_ratio)
    per_fold = statistic(t)
    if tuple(per_fold.dims) != (FOLD,):
        raise InvalidTensorError(
            f"fold statistics need one value per fold; the statistic returned dims "
            f"{per_fold.dims!r}"
        )
    pooled = float(statistic(t.sum(FOLD)))
    values = per_fold.values.astype(float)
    notes = []
    if np.isnan(values).any() or math.isnan(pooled):
        notes.append("fold statistics: a fold's value is undefined (NaN); mean, spread and "
                     "interval are not given")
    mean = float(np.mean(values))
    sd = float(np.std(values, ddof=1))
    from scipy.stats import t as student

    quantile = float(student.ppf((1 + level) / 2, j - 1))
    se = math.sqrt((1.0 / j + ratio) * sd**2)
    naive_half = quantile * sd / math.sqrt(j)
    gap = pooled - mean
    if abs(gap) > naive_half and not notes:
        notes.append(
            f"pooled R_K {pooled:.3f} and the mean of per-fold R_K {mean:.3f} differ by "
            f"{abs(gap):.3f}, more than the fold-to-fold spread explains (the {level:.0%} "
            f"t half-width is {naive_half:.3f}); the folds differ in class mix or in how the "
            "model does on them, so report both figures"
        )
    return FoldStatistics(
        per_fold=per_fold, count=j, mean=mean, sd=sd, min=float(np.min(values)),
        max=float(np.max(values)), pooled=pooled, gap=gap, level=level,
        test_train_ratio=ratio, corrected_se=se,
        corrected_ci=(mean - quantile * se, mean + quantile * se),
        naive_ci=(mean - naive_half, mean + naive_half), warnings=tuple(notes),
        naive_se=sd / math.sqrt(j), target=FOLD_TARGET,
    )

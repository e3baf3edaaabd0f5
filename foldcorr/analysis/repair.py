r"""Repair analysis: every repair figure of a confusion tensor, gathered in one result.

The gains of :mod:`foldcorr.analysis.gains` (per confusion cell, per class,
leaving a class out, the costliest confusions), pooled over folds, and how
steady each class's drag is from fold to fold (:func:`fold_stability`).
``docs/repair.md`` has the derivations. Nothing reads files, prints or draws
randoms.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import xarray as xr

from foldcorr.analysis.gains import (
    check_top,
    class_gains,
    costliest_confusions,
    leave_class_out,
    pair_gains,
)
from foldcorr.errors import InvalidTensorError, OptionError, UndefinedMetricWarning, check_choice
from foldcorr.decomposition import decompose
from foldcorr.metrics import UNDEFINED_CHOICES, Sums, correlation
from foldcorr.tensor import ACTUAL, CLASS, FOLD, PREDICTED, pool, py_value, validate_tensor

__all__ = ["fold_stability", "repair_analysis", "RepairAnalysis"]

#: Drags are compared after rounding to this many decimals (float noise is ~1e-16).
_DRAG_DECIMALS = 12


def fold_stability(t: xr.DataArray, *, top: int = 5, dim: str = FOLD) -> xr.Dataset:
    """How steady each class's drag is from fold to fold.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor with a fold dim, dims ``(..., fold, actual, predicted)``.
    top : int, default 5
        A class counts as a top drag class of a fold when its drag rank is at
        most ``top`` and its drag is positive.
    dim : str, default "fold"
        The fold dim.

    Returns
    -------
    xarray.Dataset
        ``drag`` and ``rank`` with dims ``(..., fold, class)``: each class's
        drag per fold (see :func:`foldcorr.decomposition.decompose`) and its rank,
        1 for the largest (ties share the best rank: 1 plus the number of
        classes with a strictly larger drag); ``in_top`` (rank <= top and
        drag > 0); and over the folds, dims ``(..., class)``: ``top_folds``
        (folds where the class is a top drag class), ``drag_mean``,
        ``drag_sd`` (ddof = 1; NaN for one fold), ``drag_min`` and
        ``drag_max``. ``attrs["top"]`` records ``top``.

    Raises
    ------
    InvalidTensorError
        When ``t`` has no dim ``dim``.
    OptionError
        When ``top`` is not a positive whole number.

    Notes
    -----
    A drag does not depend on the undefined convention (classes absent from
    a fold's truth or predictions have weight and drag 0), so none is taken.
    Drags are rounded to 12 decimals before ranking, so that float noise
    (a perfect class can show a drag of 1e-16) neither breaks ties nor makes
    a perfect class a top drag class.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> t = tally(list("aabbcc") * 2, list("abbbca") + list("aabcbc"),
    ...           folds=[1] * 6 + [2] * 6)
    >>> st = fold_stability(t, top=1)
    >>> st["rank"].values.tolist(), st.top_folds.values.tolist()
    ([[1, 2, 3], [3, 1, 1]], [1, 1, 1])
    """
    top = check_top(top)
    if top is None:
        raise OptionError("`top` must be a positive whole number; got None")
    t = validate_tensor(t)
    if dim not in t.dims:
        raise InvalidTensorError(f"fold stability needs a {dim!r} dim; the tensor has dims "
                                 f"{t.dims!r}")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        drag = decompose(t)["drag"]
    drag = drag.transpose(..., dim, CLASS)
    # round off float noise (a perfect class can show a drag of 1e-16) before ranking
    values = np.round(drag.values, _DRAG_DECIMALS)
    drag = drag.copy(data=values)
    rows = values.reshape(-1, values.shape[-1])
    ranks = np.empty(rows.shape, dtype=np.int64)
    for i, row in enumerate(rows):
        ordered = np.sort(-row)
        ranks[i] = 1 + np.searchsorted(ordered, -row, side="left")
    rank = drag.copy(data=ranks.reshape(values.shape)).rename("rank")
    in_top = ((rank <= top) & (drag > 0)).rename("in_top")
    folds = drag.sizes[dim]
    sd = drag.std(dim, ddof=1) if folds > 1 else xr.full_like(drag.isel({dim: 0}), np.nan)
    out = xr.Dataset({
        "drag": drag,
        "rank": rank,
        "in_top": in_top,
        "top_folds": in_top.sum(dim).rename("top_folds"),
        "drag_mean": drag.mean(dim),
        "drag_sd": sd.drop_vars(dim, errors="ignore"),
        "drag_min": drag.min(dim),
        "drag_max": drag.max(dim),
    })
    out.attrs["top"] = top
    return out


# --------------------------------------------------------------------------
# the gathered result


@dataclass(frozen=True)
class RepairAnalysis:
    """Repair gains, leave-class-out deltas, costliest confusions and fold stability.

    Attributes
    ----------
    rk : float
        Pooled R_K the gains are measured from (under ``undefined``).
    pair_gain : xarray.DataArray
        Pooled :func:`pair_gains`, dims ``(actual, predicted)``; sparse (only
        the nonzero off-diagonal cells stored) when the tensor is sparse.
    per_class : xarray.Dataset
        Dim ``class``: ``gain_fix_fn``, ``gain_fix_fp``, ``gain_fix_both``,
        ``leave_out_delta`` (pooled), and with folds ``top_folds``,
        ``drag_sd``, ``drag_min`` and ``drag_max`` from :attr:`stability`.
    confusions : xarray.Dataset
        Pooled :func:`costliest_confusions`, dim ``rank``.
    stability : xarray.Dataset or None
        :func:`fold_stability` of the per-fold tensor; None without folds.
    top : int or None
        How many confusions were kept (None: all).
    stability_top : int
        The ``top`` of the fold stability count (5 by default).
    undefined : str
        The convention for undefined values.
    warnings : tuple of str
        Undefined values met, in plain language.
    """

    rk: float
    pair_gain: xr.DataArray
    per_class: xr.Dataset
    confusions: xr.Dataset
    stability: xr.Dataset | None
    top: int | None
    stability_top: int
    undefined: str
    warnings: tuple[str, ...]

    def confusion_rows(self) -> list[tuple]:
        """The ranked confusions as ``(actual, predicted, count, gain)`` tuples.

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> t = confusion_tensor([[5, 1], [2, 6]], ["a", "b"])
        >>> [row[:3] for row in repair_analysis(t).confusion_rows()]
        [('b', 'a', 2), ('a', 'b', 1)]
        """
        c = self.confusions
        return [(py_value(a), py_value(p), py_value(n), float(g)) for a, p, n, g in
                zip(c["actual"].values, c["predicted"].values, c["count"].values,
                    c["gain"].values)]

    def __rich__(self):
        from foldcorr.report.repair import render_rich  # rendering lives in the report layer

        return render_rich(self)

    def _repr_html_(self) -> str:
        from foldcorr.report.notebook import html_fragment  # rendering lives in the report layer

        return html_fragment(self)

    def __repr__(self) -> str:
        best = self.per_class["gain_fix_both"]
        return (f"RepairAnalysis(R_K={self.rk:.4f}, {best.sizes['class']} classes, "
                f"{self.confusions.sizes['rank']} confusions ranked, "
                f"largest repair gain {float(best.max()):.4f})")


def repair_analysis(t: xr.DataArray, *, top: int | None = 20, stability_top: int = 5,
                    undefined: str = "zero") -> RepairAnalysis:
    """Every repair figure of a confusion tensor, pooled over folds.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor with dims ``([fold,] actual, predicted)``.
    top : int or None, default 20
        Confusions to keep in :attr:`RepairAnalysis.confusions` (None: all).
    stability_top : int, default 5
        See :func:`fold_stability`.
    undefined : {"zero", "nan"}, default "zero"
        Convention for undefined R_K.

    Returns
    -------
    RepairAnalysis

    Raises
    ------
    InvalidTensorError
        When the tensor has a leading dim other than ``fold``.
    OptionError
        On a bad ``top``, ``stability_top`` or ``undefined``.

    Notes
    -----
    Undefined values are not raised as warnings but gathered into
    ``warnings``; a tensor with one class gets a note that there is nothing
    to repair.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> ra = repair_analysis(tally(list("aabbcc"), list("abbbca"), folds=[1, 2] * 3))
    >>> ra.per_class.gain_fix_fn.round(3).values.tolist(), ra.stability.sizes["fold"]
    ([0.261, 0.0, 0.261], 2)
    """
    check_choice("undefined", undefined, UNDEFINED_CHOICES)
    top = check_top(top)
    t = validate_tensor(t)
    other = [d for d in t.dims if d not in (FOLD, ACTUAL, PREDICTED)]
    if other:
        raise InvalidTensorError(
            f"repair_analysis takes dims (fold, actual, predicted); select or pool {other!r} first")
    pooled = pool(t)
    notes: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UndefinedMetricWarning)
        gains = pair_gains(pooled, undefined=undefined)
        per_class = class_gains(pooled, undefined=undefined)
        per_class["leave_out_delta"] = leave_class_out(pooled, undefined=undefined)
        confusions = costliest_confusions(pooled, top=top, undefined=undefined, gains=gains)
    for w in caught:
        if issubclass(w.category, UndefinedMetricWarning):
            notes.append(f"repair: {w.message}")
        else:  # pragma: no cover - passes on anything unexpected
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    if pooled.sizes[ACTUAL] < 2:
        notes.append("repair: the tensor has one class, so there is no confusion to repair")
    stability = None
    if FOLD in t.dims:
        stability = fold_stability(t, top=stability_top)
        for name in ("top_folds", "drag_sd", "drag_min", "drag_max"):
            per_class[name] = stability[name]
    rk_value, _ = correlation(*Sums.of(pooled).rk_parts(), undefined)
    return RepairAnalysis(
        rk=float(rk_value),
        pair_gain=gains,
        per_class=per_class,
        confusions=confusions,
        stability=stability,
        top=top,
        stability_top=int(stability_top),
        undefined=undefined,
        warnings=tuple(dict.fromkeys(notes)),
    )

"""The evaluation layer: one object holding every figure a report shows.

:func:`evaluate` runs the metrics on a confusion tensor, pooled over folds and
fold by fold, collects every undefined value as a plain-language warning and
returns an :class:`Evaluation`. Renderers and the gate take that object; they
never compute.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import xarray as xr

from foldcorr import metrics as m
from foldcorr.errors import InvalidTensorError, check_choice, collect_undefined
from foldcorr.tensor import ACTUAL, FOLD, PREDICTED, pool, validate_tensor

__all__ = ["Evaluation", "FoldSummary", "evaluate", "POOLED_FIGURES"]

#: Pooled figures, in report order, with the metric that computes each.
POOLED_FIGURES = m.SUMMARY_FIGURES

#: Per-fold figures, in report order.
FOLD_FIGURES = ("rk", "accuracy", "balanced_accuracy", "macro_mcc")

#: Accuracy at or above this while R_K is below ACCURACY_HIDES_RK gets a warning.
ACCURACY_LOOKS_GOOD = 0.9
ACCURACY_HIDES_RK = 0.5


@dataclass(frozen=True)
class FoldSummary:
    """Spread of per-fold R_K.

    Attributes
    ----------
    count : int
        Number of folds.
    mean_rk, sd_rk, min_rk, max_rk : float
        Mean, sample standard deviation (ddof = 1; NaN for one fold), minimum
        and maximum of the per-fold R_K.
    """

    count: int
    mean_rk: float
    sd_rk: float
    min_rk: float
    max_rk: float

    @classmethod
    def of(cls, per_fold_rk: np.ndarray) -> FoldSummary:
        """Summarise an array of per-fold R_K values.

        Examples
        --------
        >>> FoldSummary.of(np.array([0.5, 0.7])).mean_rk
        0.6
        """
        values = np.asarray(per_fold_rk, dtype=float)
        sd = float(np.std(values, ddof=1)) if values.size > 1 else float("nan")
        return cls(
            count=int(values.size),
            mean_rk=float(np.mean(values)),
            sd_rk=sd,
            min_rk=float(np.min(values)),
            max_rk=float(np.max(values)),
        )


@dataclass(frozen=True)
class Evaluation:
    """Every figure of one evaluation, ready for any renderer.

    Attributes
    ----------
    tensor : xarray.DataArray
        The confusion tensor evaluated, with its ``fold`` dim if it had one.
    pooled : xarray.Dataset
        Scalars ``n``, ``rk``, ``accuracy``, ``balanced_accuracy``, ``kappa``,
        ``macro_f1``, ``macro_mcc`` and ``marginal_mismatch`` of the tensor
        summed over folds.
    per_class : xarray.Dataset
        Dim ``class``: ``support``, ``predicted``, ``mcc``, ``weight``,
        ``contribution``, ``drag``, ``recall``, ``precision``, ``f1``,
        ``top_confusion`` and ``top_confusion_count``, pooled over folds.
    folds : xarray.Dataset or None
        Dim ``fold``: ``n`` and the figures of ``FOLD_FIGURES``, or None when
        the tensor has no fold dim.
    fold_summary : FoldSummary or None
        Spread of the per-fold R_K, or None without folds.
    warnings : tuple of str
        Undefined values and misleading figures, in plain language.
    undefined : str
        The convention used for undefined values.
    extras : dict
        Sections that analyses attach (for example interval estimates), keyed
        by section name; renderers show the sections they know.
    """

    tensor: xr.DataArray
    pooled: xr.Dataset
    per_class: xr.Dataset
    folds: xr.Dataset | None
    fold_summary: FoldSummary | None
    warnings: tuple[str, ...]
    undefined: str = "zero"
    extras: dict = field(default_factory=dict)

    @property
    def classes(self) -> list:
        """Class labels in tensor order."""
        return self.tensor.coords[ACTUAL].values.tolist()

    @property
    def n(self) -> float:
        """Number (or total weight) of samples."""
        return _number(self.pooled["n"])

    @property
    def rk(self) -> float:
        """Pooled R_K."""
        return _number(self.pooled["rk"])

    def figure(self, name: str) -> float:
        """One pooled figure by name, as a Python float.

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
        >>> ev.figure("accuracy")
        0.75
        """
        return _number(self.pooled[name])

    def by_drag(self) -> xr.Dataset:
        """The per-class table sorted by drag, largest first (ties by class order)."""
        order = np.argsort(-self.per_class["drag"].values, kind="stable")
        return self.per_class.isel(**{m.CLASS: order})

    def with_extra(self, name: str, value) -> Evaluation:
        """A copy with one more section in :attr:`extras` (and its warnings, if it has any).

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
        >>> sorted(ev.with_extra("note", 1).extras)
        ['note']
        """
        more = tuple(getattr(value, "warnings", ()) or ())
        return replace(self, extras={**self.extras, name: value},
                       warnings=tuple(dict.fromkeys(self.warnings + more)))

    def __rich__(self):
        from foldcorr.report.text import render_rich  # rendering lives in the report layer

        return render_rich(self)


def _number(value) -> float:
    v = float(value)
    return int(v) if v.is_integer() and abs(v) < 2**53 and value.dtype.kind in "iu" else v


def evaluate(t, *, undefined: str = "zero") -> Evaluation:
    """Compute every figure of a confusion tensor.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor with dims ``([fold,] actual, predicted)``.
    undefined : {"zero", "nan"}, default "zero"
        Convention for undefined values; every undefined value is also named
        in ``Evaluation.warnings``.

    Returns
    -------
    Evaluation

    Raises
    ------
    InvalidTensorError
        When the tensor has a leading dim other than ``fold``.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> ev = evaluate(tally(["a", "a", "b", "c"], ["a", "b", "b", "c"], folds=[1, 2, 1, 2]))
    >>> round(ev.rk, 4), ev.fold_summary.count
    (0.7, 2)
    """
    check_choice("undefined", undefined, m.UNDEFINED_CHOICES)
    t = validate_tensor(t)
    other = [d for d in t.dims if d not in (FOLD, ACTUAL, PREDICTED)]
    if other:
        raise InvalidTensorError(
            f"evaluate takes dims (fold, actual, predicted); select or pool {other!r} first"
        )
    notes: list[str] = []
    pooled_t = pool(t)
    pooled = collect_undefined(notes, "pooled", lambda: _pooled(pooled_t, undefined))
    per_class = collect_undefined(notes, "pooled", lambda: _per_class(pooled_t, undefined))
    folds = summary = None
    if FOLD in t.dims:
        folds = collect_undefined(notes, "per fold", lambda: _per_fold(t, undefined))
        summary = FoldSummary.of(folds["rk"].values)
    notes.extend(_accuracy_hides(pooled, per_class))
    return Evaluation(
        tensor=t,
        pooled=pooled,
        per_class=per_class,
        folds=folds,
        fold_summary=summary,
        warnings=tuple(dict.fromkeys(notes)),
        undefined=undefined,
    )


def _pooled(t, undefined) -> xr.Dataset:
    figures = {name: fn(t, undefined=undefined) for name, fn in POOLED_FIGURES.items()}
    figures["marginal_mismatch"] = m.decompose(t, undefined=undefined)["marginal_mismatch"]
    figures["n"] = m._count_sum(t, (ACTUAL, PREDICTED))
    return xr.Dataset({k: v.drop_attrs() if hasattr(v, "drop_attrs") else v for k, v in figures.items()})


def _per_class(t, undefined) -> xr.Dataset:
    d = m.decompose(t, undefined=undefined)
    return xr.Dataset(
        {
            "support": m.support(t),
            "predicted": m.predicted_count(t),
            "mcc": d["mcc"],
            "weight": d["weight"],
            "contribution": d["contribution"],
            "drag": d["drag"],
            "recall": m.recall(t, undefined=undefined),
            "precision": m.precision(t, undefined=undefined),
            "f1": m.f1(t, undefined=undefined),
            **m.top_confusion(t).data_vars,
        }
    )


def _per_fold(t, undefined) -> xr.Dataset:
    figures = {name: POOLED_FIGURES[name](t, undefined=undefined) for name in FOLD_FIGURES}
    figures["n"] = m._count_sum(t, (ACTUAL, PREDICTED))
    return xr.Dataset(figures)


def _accuracy_hides(pooled: xr.Dataset, per_class: xr.Dataset) -> list[str]:
    acc, rk = float(pooled["accuracy"]), float(pooled["rk"])
    # R_K is 0/0 unless truth and predictions each cover at least two classes; then the
    # undefined warning already says so, and "R_K is only 0.000" would mislead.
    rk_defined = all(int((per_class[v] > 0).sum()) >= 2 for v in ("support", "predicted"))
    if rk_defined and acc >= ACCURACY_LOOKS_GOOD and rk < ACCURACY_HIDES_RK:
        return [
            f"accuracy is {acc:.3f} but R_K is only {rk:.3f}: the accuracy comes mostly from "
            "frequent classes, and the predictions are weakly correlated with the truth once "
            "class imbalance is accounted for"
        ]
    return []

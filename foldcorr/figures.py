r"""The figure registry: every figure of an evaluation, declared once.

A :class:`Figure` names a figure (``key``), the words a report shows for it
(``label``), the metric computing it from a tensor, its scope (pooled, per
fold, per class, per label), the tensor kinds it applies to and how it is
formatted. :data:`FIGURES` lists them in report order. The evaluation computes
from this list and every renderer (text, Markdown, JSON, HTML) draws its rows
and keys from it, so they show the same figures. Adding a figure is one entry
here.

A multilabel tensor has dims ``(..., "label", "actual", "predicted")`` with
class coordinates ``[False, True]``: micro averaging sums the tensor over
``label`` before the metric, macro averaging takes the mean after it.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import xarray as xr

from foldcorr import metrics as m
from foldcorr.decomposition import class_flags, decompose
from foldcorr.errors import InvalidTensorError, UndefinedMetricWarning
from foldcorr.tensor import ACTUAL, CLASS, FOLD, LABEL, PREDICTED

__all__ = [
    "tensor_kind", "compute_figures",
    "MULTICLASS", "MULTILABEL", "KINDS", "POOLED", "PER_FOLD", "PER_CLASS", "PER_LABEL",
    "SCOPES", "STYLES", "Figure", "FIGURES", "RANKED_BY", "BUDGETED", "figures_of", "sample_count", "micro_mcc",
    "label_macro_mcc", "weighted_mcc",
]

MULTICLASS, MULTILABEL = "multiclass", "multilabel"
#: Tensor kinds an evaluation recognises.
KINDS = (MULTICLASS, MULTILABEL)

POOLED, PER_FOLD, PER_CLASS, PER_LABEL = "pooled", "fold", "class", "label"
#: Where a figure lives: over the whole tensor, one per fold, one per class, one per label.
SCOPES = (POOLED, PER_FOLD, PER_CLASS, PER_LABEL)

#: How a figure is formatted: a correlation (colour bands on a terminal), another
#: metric (three decimals), a count, a class confusion (a label and a count), or
#: the bits of :func:`foldcorr.decomposition.class_flags` (words in reports, a list in JSON).
STYLES = ("correlation", "metric", "count", "confusion", "flags")


@dataclass(frozen=True)
class Figure:
    """One figure: what it is called, how it is computed, where it lives, how it looks.

    Attributes
    ----------
    key : str
        Name in the evaluation's datasets and in JSON.
    label : str
        The words a report shows (a row or column title).
    compute : callable
        ``compute(tensor, undefined=...)`` -> DataArray, or a Dataset when
        several figures share one computation (see ``part``).
    scope : str
        One of :data:`SCOPES`.
    kinds : tuple of str
        The tensor kinds (:data:`KINDS`) it applies to.
    style : str
        One of :data:`STYLES`.
    part : str or None
        The variable of a Dataset result that is this figure; None when
        ``compute`` returns the figure itself.
    headline : str
        Short name in a report's headline facts; empty when not a headline.
    """

    key: str
    label: str
    compute: Callable
    scope: str
    kinds: tuple[str, ...]
    style: str = "metric"
    part: str | None = None
    headline: str = ""


def figures_of(kind: str, scope: str) -> tuple[Figure, ...]:
    """The figures of one tensor kind and scope, in report order.

    Examples
    --------
    >>> [f.key for f in figures_of(MULTILABEL, PER_FOLD)]
    ['n', 'micro_mcc', 'macro_mcc']
    """
    return tuple(f for f in FIGURES if scope == f.scope and kind in f.kinds)


def sample_count(t, *, undefined: str = "zero") -> xr.DataArray:
    """Number (or total weight) of samples over the leading dims, without int64 overflow.

    A multilabel tensor counts every sample once per label, so the count is
    that of its first label (0 without labels). ``undefined`` is accepted for
    a uniform signature and not used.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> int(sample_count(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])))
    12
    """
    if LABEL in t.dims:
        if t.sizes[LABEL] == 0:
            return xr.zeros_like(t.sum((LABEL, ACTUAL, PREDICTED)))
        t = t.isel({LABEL: 0}, drop=True)
    out = m.count_total(t)
    return out.drop_attrs() if hasattr(out, "drop_attrs") else out


def micro_mcc(t, *, undefined: str = "zero") -> xr.DataArray:
    """MCC of a multilabel tensor summed over labels.

    Examples
    --------
    >>> from foldcorr.tensor import multilabel_tally
    >>> t = multilabel_tally([[1, 0], [1, 1], [0, 1], [0, 0]], [[1, 0], [0, 1], [0, 1], [0, 0]])
    >>> round(float(micro_mcc(t)), 4)
    0.7746
    """
    return m.mcc(t.sum(LABEL), undefined=undefined).rename("micro_mcc")


def _positive(da: xr.DataArray) -> xr.DataArray:
    return da.sel({CLASS: True}, drop=True)


def _present(t) -> xr.DataArray:
    return (_positive(m.support(t)) + _positive(m.predicted_count(t))) > 0


def label_macro_mcc(t, *, undefined: str = "zero") -> xr.DataArray:
    """Mean MCC over the labels present in truth or predictions (undefined: none present).

    A present label whose MCC is NaN (``undefined="nan"``) makes the mean
    NaN, as :func:`foldcorr.metrics.macro_mcc` does.

    Examples
    --------
    >>> from foldcorr.tensor import multilabel_tally
    >>> t = multilabel_tally([[1, 0], [1, 1], [0, 1], [0, 0]], [[1, 0], [0, 1], [0, 1], [0, 0]])
    >>> round(float(label_macro_mcc(t)), 4)
    0.7887
    """
    per_label, present = m.mcc(t, undefined=undefined), _present(t)
    k = present.sum(LABEL)
    total = per_label.where(present, 0.0).sum(LABEL, skipna=False)
    value = np.nan if undefined == "nan" else 0.0
    return xr.where(k > 0, total / k.where(k > 0, 1), value).rename("macro_mcc")


def weighted_mcc(t, *, undefined: str = "zero") -> xr.DataArray:
    """Support-weighted mean MCC over labels; undefined when no label has a positive.

    A label with no support has weight 0 and adds nothing, whatever its MCC.

    Warns
    -----
    UndefinedMetricWarning
        When no label has a positive in truth.

    Examples
    --------
    >>> from foldcorr.tensor import multilabel_tally
    >>> t = multilabel_tally([[1, 0], [1, 1], [0, 1], [0, 0]], [[1, 0], [0, 1], [0, 1], [0, 0]])
    >>> round(float(weighted_mcc(t)), 4)
    0.7887
    """
    weight = _positive(m.support(t)).astype(float)
    total = weight.sum(LABEL)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        per_label = m.mcc(t, undefined=undefined)
    value = (weight * per_label.where(weight > 0, 0.0)).sum(LABEL, skipna=False)
    if bool((total == 0).any()):
        shown = "0.0" if undefined == "zero" else "NaN"
        warnings.warn(f"MCC weighted by in-truth count (no label has a positive) is undefined; reported "
                      f"as {shown}", UndefinedMetricWarning, stacklevel=2)
    fill = 0.0 if undefined == "zero" else np.nan
    return xr.where(total > 0, value / total.where(total > 0, 1), fill).rename("weighted_mcc")


def _counts(fn):
    def count(t, *, undefined: str = "zero"):
        return fn(t)
    return count


_support, _predicted = _counts(m.support), _counts(m.predicted_count)
_top_confusion = _counts(m.top_confusion)


def _label_support(t, *, undefined="zero"):
    return _positive(m.support(t))


def _label_predicted(t, *, undefined="zero"):
    return _positive(m.predicted_count(t))


def _prevalence(t, *, undefined="zero"):
    n = t.sum((ACTUAL, PREDICTED))
    return _label_support(t) / n.where(n > 0, 1)


def _positive_ratio(t, denominator, what: str, undefined: str):
    tp = t.sel({ACTUAL: True, PREDICTED: True}, drop=True)
    den = denominator(t)
    bad = den == 0
    if bool(bad.any()):
        where = ", ".join(repr(v.item() if isinstance(v, np.generic) else v)
                          for v in den[LABEL].values[bad.values])
        shown = "0.0" if undefined == "zero" else "NaN"
        warnings.warn(f"{what} is undefined (0/0) for label {where}; reported as {shown}",
                      UndefinedMetricWarning, stacklevel=3)
    fill = 0.0 if undefined == "zero" else np.nan
    return xr.where(bad, fill, tp / den.where(~bad, 1))


def _label_recall(t, *, undefined="zero"):
    return _positive_ratio(t, _label_support, "recall", undefined)


def _label_precision(t, *, undefined="zero"):
    return _positive_ratio(t, _label_predicted, "precision", undefined)


def _label_f1(t, *, undefined="zero"):
    return _positive_ratio(t, lambda x: (_label_support(x) + _label_predicted(x)) / 2, "F1",
                           undefined)


def _label_drag(t, *, undefined="zero"):
    """(1 - MCC) / (labels present): each label's share of 1 - macro MCC (0 when absent)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        per_label = m.mcc(t, undefined=undefined)
    present = _present(t)
    k = present.sum(LABEL)
    return xr.where(present, (1 - per_label) / k.where(k > 0, 1), 0.0)


def _label_cost(t, *, undefined="zero"):
    """(1 - MCC) x in-truth count; an undefined MCC counts as 0 here."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        per_label = m.mcc(t, undefined=undefined)
    return (1 - per_label.fillna(0.0)) * _label_support(t)


_C, _L, _BOTH = (MULTICLASS,), (MULTILABEL,), (MULTICLASS, MULTILABEL)

#: Every figure, in report order within each scope.
FIGURES: tuple[Figure, ...] = (
    # pooled over folds
    Figure("n", "samples", sample_count, POOLED, _BOTH, "count"),
    Figure("rk", "R_K", m.rk, POOLED, _C, "correlation", headline="R_K"),
    Figure("accuracy", "accuracy", m.accuracy, POOLED, _C),
    Figure("balanced_accuracy", "balanced accuracy", m.balanced_accuracy, POOLED, _C),
    Figure("kappa", "Cohen's kappa", m.cohen_kappa, POOLED, _C),
    Figure("macro_f1", "macro F1", m.macro_f1, POOLED, _C),
    Figure("macro_mcc", "macro one-vs-rest MCC", m.macro_mcc, POOLED, _C, "correlation"),
    Figure("marginal_mismatch", "marginal mismatch", decompose, POOLED, _C,
           part="marginal_mismatch"),
    Figure("micro_mcc", "micro MCC (tensor summed over labels)", micro_mcc, POOLED, _L,
           "correlation", headline="micro MCC"),
    Figure("macro_mcc", "macro MCC (mean over labels present)", label_macro_mcc, POOLED, _L,
           "correlation", headline="macro MCC"),
    Figure("weighted_mcc", "MCC weighted by in-truth count", weighted_mcc, POOLED, _L, "correlation"),
    # one per fold
    Figure("n", "samples", sample_count, PER_FOLD, _BOTH, "count"),
    Figure("rk", "R_K", m.rk, PER_FOLD, _C, "correlation"),
    Figure("accuracy", "accuracy", m.accuracy, PER_FOLD, _C),
    Figure("balanced_accuracy", "bal. acc.", m.balanced_accuracy, PER_FOLD, _C),
    Figure("macro_mcc", "macro MCC", m.macro_mcc, PER_FOLD, _C, "correlation"),
    Figure("micro_mcc", "micro MCC", micro_mcc, PER_FOLD, _L, "correlation"),
    Figure("macro_mcc", "macro MCC", label_macro_mcc, PER_FOLD, _L, "correlation"),
    # one per class (multiclass), pooled over folds
    Figure("in_truth", "in truth", _support, PER_CLASS, _C, "count"),
    Figure("predicted", "predicted", _predicted, PER_CLASS, _C, "count"),
    Figure("mcc", "MCC", decompose, PER_CLASS, _C, "correlation", part="mcc"),
    Figure("weight", "weight", decompose, PER_CLASS, _C, part="weight"),
    Figure("contribution", "contrib.", decompose, PER_CLASS, _C, part="contribution"),
    Figure("drag", "drag", decompose, PER_CLASS, _C, part="drag"),
    Figure("mismatch_share", "mismatch share", decompose, PER_CLASS, _C, part="mismatch_share"),
    Figure("shortfall_share", "shortfall share", decompose, PER_CLASS, _C,
           part="shortfall_share"),
    Figure("recall", "recall", m.recall, PER_CLASS, _C),
    Figure("precision", "precision", m.precision, PER_CLASS, _C),
    Figure("f1", "F1", m.f1, PER_CLASS, _C),
    Figure("flags", "flags", class_flags, PER_CLASS, _C, "flags"),
    Figure("top_confusion", "most often taken for", _top_confusion, PER_CLASS, _C, "confusion"),
    # one per label (multilabel), pooled over folds
    Figure("in_truth", "in truth", _label_support, PER_LABEL, _L, "count"),
    Figure("predicted", "predicted", _label_predicted, PER_LABEL, _L, "count"),
    Figure("prevalence", "prevalence", _prevalence, PER_LABEL, _L),
    Figure("mcc", "MCC", m.mcc, PER_LABEL, _L, "correlation"),
    Figure("recall", "recall", _label_recall, PER_LABEL, _L),
    Figure("precision", "precision", _label_precision, PER_LABEL, _L),
    Figure("f1", "F1", _label_f1, PER_LABEL, _L),
    Figure("drag", "drag", _label_drag, PER_LABEL, _L),
    Figure("cost", "cost", _label_cost, PER_LABEL, _L, "count"),
)

#: The figure a row table is sorted by (largest first), per row scope.
RANKED_BY = {PER_CLASS: "shortfall_share", PER_LABEL: "cost"}

#: The pooled figure whose shortfall from 1 the row drags add up to (with the
#: marginal mismatch for multiclass), per kind: the figure of the loss budget.
BUDGETED = {MULTICLASS: "rk", MULTILABEL: "macro_mcc"}


def tensor_kind(t) -> str:
    """The kind of a validated tensor: multilabel when it has a ``label`` dim, else multiclass.

    Raises
    ------
    InvalidTensorError
        When a dim other than ``fold`` (and ``label``) leads, or a ``label``
        tensor's class coordinates are not ``[False, True]``.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> tensor_kind(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
    'multiclass'
    """
    lead = {d for d in t.dims if d not in (ACTUAL, PREDICTED)}
    if LABEL in lead:
        classes = t.coords[ACTUAL].values.tolist()
        if classes != [False, True]:
            raise InvalidTensorError(
                f"a multilabel tensor has class coordinates [False, True]; got {classes!r}")
        if lead - {FOLD, LABEL}:
            raise InvalidTensorError(
                f"select or pool the dims {sorted(lead - {FOLD, LABEL})!r} first; accepted dims "
                "are (fold, label, actual, predicted)")
        return MULTILABEL
    if lead - {FOLD}:
        raise InvalidTensorError(
            f"evaluate takes dims (fold, actual, predicted); select or pool "
            f"{[d for d in t.dims if d in lead - {FOLD}]!r} first")
    return MULTICLASS


def compute_figures(figures, t, *, undefined: str = "zero") -> xr.Dataset:
    """Compute registry figures on one tensor; figures sharing a computation run it once.

    Examples
    --------
    >>> from foldcorr.figures import MULTICLASS, PER_CLASS, figures_of
    >>> from foldcorr.tensor import confusion_tensor
    >>> t = confusion_tensor([[6, 2], [1, 3]], ["p", "n"])
    >>> compute_figures(figures_of(MULTICLASS, PER_CLASS), t)["in_truth"].values.tolist()
    [8, 4]
    """
    done: dict = {}
    out: dict = {}
    for f in figures:
        if f.compute not in done:
            done[f.compute] = f.compute(t, undefined=undefined)
        value = done[f.compute] if f.part is None else done[f.compute][f.part]
        parts = value.data_vars if isinstance(value, xr.Dataset) else {f.key: value.rename(f.key)}
        out.update({k: v.drop_attrs() if hasattr(v, "drop_attrs") else v
                    for k, v in parts.items()})
    return xr.Dataset(out)

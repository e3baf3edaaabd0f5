"""The evaluation layer: one object holding every figure a report shows, for every tensor kind.

:func:`evaluate` recognises the kind of a confusion tensor (multiclass, or
multilabel: a ``label`` dim with class coordinates ``[False, True]``), runs the
figures of :data:`foldcorr.figures.FIGURES` for that kind, pooled over folds,
fold by fold and per class or per label, collects every undefined value as a
plain-language warning and returns an :class:`Evaluation`. Renderers and the
gate take that object; they never compute.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd
import xarray as xr

from foldcorr import figures as fg
from foldcorr.figures import compute_figures, tensor_kind
from foldcorr import metrics as m
from foldcorr.decomposition import FLAGS
from foldcorr.errors import (InvalidTensorError, UndefinedMetricWarning, check_choice,
                             collect_undefined)
from foldcorr.tensor import ACTUAL, CLASS, FOLD, LABEL, PREDICTED, pool, py_value, validate_tensor

__all__ = ["Evaluation", "FoldSummary", "FRAME_KINDS", "RANK_BY", "evaluate"]

#: Accuracy at or above this while R_K is below ACCURACY_HIDES_RK gets a warning.
ACCURACY_LOOKS_GOOD = 0.9
ACCURACY_HIDES_RK = 0.5

#: Orders of the class table: ``--rank-by`` name -> (figure key, words, largest first).
#: ``share`` is the shortfall share of a class (the cost of a label); ``gain`` the gain in
#: R_K from repairing every error of the class (the repair analysis's ``gain_fix_both``).
RANK_BY = {"share": (None, "shortfall share", True), "mcc": ("mcc", "MCC, lowest first", False),
           "recall": ("recall", "recall, lowest first", False),
           "precision": ("precision", "precision, lowest first", False),
           "gain": ("gain_fix_both", "gain from repairing all their errors", True)}

#: What each scope's undefined values are called in the warnings.
CONTEXT = {fg.POOLED: "pooled", fg.PER_CLASS: "pooled", fg.PER_LABEL: "per label",
           fg.PER_FOLD: "per fold"}

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


#: The tables :meth:`Evaluation.to_frame` gives.
FRAME_KINDS = ("class", "fold", "label", "confusions")


@dataclass(frozen=True)
class Evaluation:
    """Every figure of one evaluation, ready for any renderer.

    Attributes
    ----------
    tensor : xarray.DataArray
        The confusion tensor evaluated, with its ``fold`` dim if it had one.
    pooled : xarray.Dataset
        The pooled figures of :data:`foldcorr.figures.FIGURES` for this kind
        (``n`` always), of the tensor summed over folds.
    per_class : xarray.Dataset or None
        Multiclass: dim ``class``, the per-class figures of the registry
        (``top_confusion`` comes with ``top_confusion_count``) in class
        order, pooled over folds. None for a multilabel tensor.
    folds : xarray.Dataset or None
        Dim ``fold``: the per-fold figures of the registry, or None when the
        tensor has no fold dim.
    fold_summary : FoldSummary or None
        Spread of the per-fold R_K (multiclass with folds), else None.
    warnings : tuple of str
        Undefined values and misleading figures, in plain language.
    undefined : str
        The convention used for undefined values.
    extras : dict
        Sections that analyses attach (for example interval estimates), keyed
        by section name; renderers show the sections they know.
    kind : str
        ``"multiclass"`` or ``"multilabel"`` (:data:`foldcorr.figures.KINDS`).
    per_label : xarray.Dataset or None
        Multilabel: dim ``label``, the per-label figures of the registry,
        sorted by ``cost``, largest first. None for a multiclass tensor.
    rank_by : str
        Order of :meth:`ranked`, a key of :data:`RANK_BY` (default ``"share"``).
    per_class_fold : xarray.Dataset or None
        Multiclass with folds: :func:`foldcorr.analysis.classfold.class_by_fold`
        (per-class MCC, shortfall share and rank in each fold); else None.
    """

    tensor: xr.DataArray
    pooled: xr.Dataset
    per_class: xr.Dataset | None
    folds: xr.Dataset | None
    fold_summary: FoldSummary | None
    warnings: tuple[str, ...]
    undefined: str = "zero"
    extras: dict = field(default_factory=dict)
    kind: str = fg.MULTICLASS
    per_label: xr.Dataset | None = None
    rank_by: str = "share"
    per_class_fold: xr.Dataset | None = None

    @property
    def row_scope(self) -> str:
        """The scope of the row table: ``"class"`` (multiclass) or ``"label"`` (multilabel)."""
        return fg.PER_LABEL if self.kind == fg.MULTILABEL else fg.PER_CLASS

    @property
    def rows(self) -> xr.Dataset:
        """The per-class (multiclass) or per-label (multilabel) table, in tensor order."""
        return self.per_label if self.kind == fg.MULTILABEL else self.per_class

    def figures(self, scope: str) -> tuple:
        """The registry figures of this evaluation's kind in one scope, in report order.

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
        >>> [f.key for f in ev.figures("fold")]
        ['n', 'rk', 'accuracy', 'balanced_accuracy', 'macro_mcc']
        """
        return fg.figures_of(self.kind, scope)

    @property
    def classes(self) -> list:
        """Class labels in tensor order."""
        return self.tensor.coords[ACTUAL].values.tolist()

    @property
    def row_names(self) -> list:
        """Names of the rows of :attr:`rows`: the classes, or the labels of a multilabel tensor.

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])).row_names
        ['p', 'n']
        """
        return self.rows.coords[self.row_scope].values.tolist()

    @property
    def labels(self) -> list:
        """Labels of a multilabel tensor, in tensor order (empty for multiclass)."""
        return self.tensor.coords[LABEL].values.tolist() if LABEL in self.tensor.dims else []

    @property
    def n(self) -> float:
        """Number (or total weight) of samples."""
        return _number(self.pooled["n"])

    @property
    def rk(self) -> float:
        """Pooled R_K (multiclass)."""
        return _number(self.pooled["rk"])

    @property
    def micro_mcc(self) -> float:
        """MCC of the tensor summed over labels (multilabel)."""
        return self.figure("micro_mcc")

    @property
    def macro_mcc(self) -> float:
        """Mean one-vs-rest MCC over classes, or mean MCC over labels present."""
        return self.figure("macro_mcc")

    @property
    def weighted_mcc(self) -> float:
        """Support-weighted mean MCC over labels (multilabel)."""
        return self.figure("weighted_mcc")

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

    def ranked(self, by: str | None = None) -> xr.Dataset:
        """The row table in report order, by :attr:`rank_by` unless ``by`` names another.

        ``"share"``: by shortfall share (labels by cost), largest first; ``"mcc"``, ``"recall"``,
        ``"precision"``: lowest first (undefined last); ``"gain"``: by the gain in R_K from
        repairing all the class's errors, largest first (multiclass). Ties keep tensor order.

        Raises
        ------
        OptionError
            An unknown order, or ``"gain"`` of a multilabel evaluation.

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> ev = evaluate(confusion_tensor([[6, 0], [3, 3]], ["p", "n"]))
        >>> ev.ranked()["class"].values.tolist()
        ['p', 'n']
        >>> t = confusion_tensor([[9, 1, 0], [2, 1, 0], [0, 0, 30]], ["a", "b", "c"])
        >>> evaluate(t).ranked("recall")["class"].values.tolist()
        ['b', 'a', 'c']
        """
        by = self.rank_by if by is None else by
        _check_rank_by(self.kind, by)
        rows = self.rows
        key, _, largest_first = RANK_BY[by]
        if by == "gain":
            values = self._gains()
        else:
            values = rows[fg.RANKED_BY[self.row_scope] if key is None else key].values
        values = np.asarray(values, dtype=float)
        fill = -np.inf if largest_first else np.inf
        keyed = np.where(np.isnan(values), fill, values)
        order = np.argsort(-keyed if largest_first else keyed, kind="stable")
        return rows.isel({self.row_scope: order})

    @property
    def rank_words(self) -> str:
        """How :meth:`ranked` orders the rows, in words (``"shortfall share"``, ...)."""
        cost = self.kind == fg.MULTILABEL and self.rank_by == "share"
        return "cost" if cost else RANK_BY[self.rank_by][1]

    def _gains(self) -> np.ndarray:
        """Per-class gain from repairing all of a class's errors, in tensor order."""
        repair = self.extras.get("repair")
        if repair is not None:
            return repair.per_class["gain_fix_both"].sel({CLASS: self.classes}).values
        from foldcorr.analysis.gains import class_gains
        from foldcorr.tensor.backing import as_dense

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UndefinedMetricWarning)
            gains = class_gains(as_dense(pool(self.tensor)), undefined=self.undefined)
        return gains["gain_fix_both"].values

    def by_drag(self) -> xr.Dataset:
        """The per-class table by shortfall share, largest first (``ranked("share")``)."""
        return self.ranked("share")

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

    def to_frame(self, kind: str = "class") -> pd.DataFrame:
        """One table of this evaluation as a tidy pandas DataFrame, one row per entry.

        Parameters
        ----------
        kind : {"class", "fold", "label", "confusions"}
            ``"class"``: the per-class figures (multiclass); ``"label"``: the
            per-label figures (multilabel); ``"fold"``: the per-fold figures;
            ``"confusions"``: every cell of the tensor, a ``count`` column
            beside its coordinates.

        Raises
        ------
        OptionError
            An unknown ``kind``, or one this evaluation does not have (no folds,
            a multilabel evaluation asked for classes, ...).

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
        >>> ev.to_frame("confusions")["count"].tolist()
        [6, 2, 1, 3]
        """
        from foldcorr.errors import OptionError
        from foldcorr.tensor.backing import as_dense

        check_choice("kind", kind, FRAME_KINDS)
        if kind == "confusions":
            return as_dense(self.tensor).to_dataframe(name="count").reset_index()
        data = {"class": self.per_class, "label": self.per_label, "fold": self.folds}[kind]
        if data is None:
            raise OptionError(f"`kind` {kind!r} has no table in this {self.kind} evaluation"
                              f"{'' if kind != 'fold' else ' without folds'}")
        return data.to_dataframe().reset_index()

    def to_dict(self) -> dict[str, float]:
        """The headline figures, flat: every pooled figure, and each per-fold figure's mean and sd.

        Keys are figure keys of :data:`foldcorr.figures.FIGURES` (pooled) and
        ``fold_mean_<key>`` / ``fold_sd_<key>`` (sample sd, ddof = 1) with folds;
        values are Python floats, ready for an experiment tracker.

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
        >>> ev.to_dict()["accuracy"]
        0.75
        """
        out = {k: float(v) for k, v in self.pooled.data_vars.items()
               if v.ndim == 0 and v.dtype.kind in "iufb"}
        for key, values in (self.folds.data_vars.items() if self.folds is not None else ()):
            if key != "n" and values.dims == (FOLD,) and values.dtype.kind in "iuf":
                v = values.values.astype(float)
                out[f"fold_mean_{key}"] = float(np.mean(v))
                out[f"fold_sd_{key}"] = float(np.std(v, ddof=1)) if v.size > 1 else float("nan")
        return out

    def to_json(self) -> str:
        """The JSON document ``foldcorr score --format json`` writes.

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])).to_json()[:32]
        '{\\n  "schema": "foldcorr.score/2"'
        """
        from foldcorr.report import render  # rendering lives in the report layer

        return render(self, "json")

    def to_html(self) -> str:
        """The HTML page ``foldcorr score --format html`` writes.

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])).to_html()[:15]
        '<!DOCTYPE html>'
        """
        from foldcorr.report import render  # rendering lives in the report layer

        return render(self, "html")

    def to_markdown(self) -> str:
        """The Markdown ``foldcorr score --format markdown`` writes.

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])).to_markdown()[:17]
        '## foldcorr score'
        """
        from foldcorr.report import render  # rendering lives in the report layer

        return render(self, "markdown")

    def plot(self, kind: str = "loss_budget", ax=None, **options):
        """Draw one plot of this result with matplotlib (the ``plot`` extra).

        Parameters
        ----------
        kind : str, default "loss_budget"
            A plot of ``foldcorr.report.plots.PLOTS["Evaluation"]``.
        ax : matplotlib.axes.Axes, optional
            Draw there and return it; without it, a new figure is returned,
            which shows itself inline in a notebook.
        **options
            Options of the plot function (``docs/plots.md``).

        Raises
        ------
        OptionError
            On a kind this result has no plot for.
        MissingDependencyError
            When matplotlib is not installed.

        Examples
        --------
        >>> from foldcorr.tensor import confusion_tensor
        >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
        >>> ev.plot("confusion").axes[0].get_ylabel()
        'actual class'
        """
        from foldcorr.report.plots import plot  # drawing lives in the report layer

        return plot(self, kind, ax=ax, **options)

    def _repr_html_(self) -> str:
        from foldcorr.report.notebook import html_fragment  # rendering lives in the report layer

        return html_fragment(self)

    def __repr__(self) -> str:
        folds = f", {self.tensor.sizes[FOLD]} folds" if FOLD in self.tensor.dims else ""
        head = ", ".join(f"{f.key}={self.figure(f.key):.4f}" for f in self.figures(fg.POOLED)
                         if f.key != "n" and self.pooled[f.key].ndim == 0)
        return (f"Evaluation({self.kind}, {len(self.row_names)} {self.row_scope} rows, "
                f"n={self.n}{folds}, {len(self.warnings)} warnings)\n  {head}")


def _number(value) -> float:
    v = float(value)
    return int(v) if v.is_integer() and abs(v) < 2**53 and value.dtype.kind in "iu" else v


def evaluate(t: xr.DataArray, *, undefined: str = "zero", rank_by: str = "share") -> Evaluation:
    r"""Compute every figure of a confusion tensor, multiclass or multilabel.

    Parameters
    ----------
    t : xarray.DataArray
        Confusion tensor with dims ``([fold,] actual, predicted)``, or a
        multilabel tensor with dims ``([fold,] label, actual, predicted)`` and
        class coordinates ``[False, True]``.
    undefined : {"zero", "nan"}, default "zero"
        Convention for undefined values; every undefined value is also named
        in ``Evaluation.warnings``.
    rank_by : {"share", "mcc", "recall", "precision", "gain"}, default "share"
        Order of the class (or label) table, see :meth:`Evaluation.ranked`.

    Returns
    -------
    Evaluation
        ``kind`` says which of the two the tensor is.

    Raises
    ------
    InvalidTensorError
        When the tensor has another leading dim, or a ``label`` dim with
        class coordinates other than ``[False, True]``.

    Notes
    -----
    Multilabel, with :math:`C_\ell` the 2 x 2 matrix of label :math:`\ell`:
    micro MCC is :math:`\mathrm{MCC}(\sum_\ell C_\ell)`, macro MCC the mean
    of :math:`\mathrm{MCC}(C_\ell)` over the labels with a positive in truth
    or predictions, weighted MCC the mean weighted by in-truth counts. Labels are sorted
    by cost :math:`(1 - \mathrm{MCC}_\ell)\, n^+_\ell`, largest first (an
    undefined MCC counts as 0 there), ties in label order.

    Examples
    --------
    >>> from foldcorr.tensor import tally
    >>> ev = evaluate(tally(["a", "a", "b", "c"], ["a", "b", "b", "c"], folds=[1, 2, 1, 2]))
    >>> ev.kind, round(ev.rk, 4), ev.fold_summary.count
    ('multiclass', 0.7, 2)
    >>> from foldcorr.tensor import multilabel_tally
    >>> ml = evaluate(multilabel_tally([[1, 0], [1, 1], [0, 1], [0, 0]],
    ...                                [[1, 0], [0, 1], [0, 1], [0, 0]], labels=["gull", "tern"]))
    >>> ml.kind, round(ml.micro_mcc, 4), ml.per_label["mcc"].round(4).values.tolist()
    ('multilabel', 0.7746, [0.5774, 1.0])
    """
    check_choice("undefined", undefined, m.UNDEFINED_CHOICES)
    t = validate_tensor(t)
    kind = tensor_kind(t)
    _check_rank_by(kind, rank_by)
    if kind == fg.MULTILABEL:
        t = t.transpose(*[d for d in (FOLD, LABEL) if d in t.dims], ACTUAL, PREDICTED)
    notes: list[str] = []

    def run(scope, tensor):
        return collect_undefined(notes, CONTEXT[scope], lambda: compute_figures(
            fg.figures_of(kind, scope), tensor, undefined=undefined))

    pooled_t = pool(t)
    pooled = run(fg.POOLED, pooled_t)
    row_scope = fg.PER_LABEL if kind == fg.MULTILABEL else fg.PER_CLASS
    rows = run(row_scope, pooled_t)
    folds = summary = by_fold = None
    if FOLD in t.dims:
        folds = run(fg.PER_FOLD, t)
        if "rk" in folds:
            summary = FoldSummary.of(folds["rk"].values)
        if kind == fg.MULTICLASS:
            from foldcorr.analysis.classfold import class_by_fold

            by_fold = class_by_fold(t, undefined=undefined)
    if kind == fg.MULTILABEL:
        order = np.argsort(-rows["cost"].values, kind="stable")
        rows = rows.isel({LABEL: order})
    else:
        notes.extend(_accuracy_hides(pooled, rows))
        notes.extend(_flag_notes(rows))
    return Evaluation(
        tensor=t,
        pooled=pooled,
        per_class=None if kind == fg.MULTILABEL else rows,
        folds=folds,
        fold_summary=summary,
        warnings=tuple(dict.fromkeys(notes)),
        undefined=undefined,
        kind=kind,
        per_label=rows if kind == fg.MULTILABEL else None,
        rank_by=rank_by,
        per_class_fold=by_fold,
    )


def _check_rank_by(kind: str, by: str) -> None:
    check_choice("rank_by", by, tuple(RANK_BY))
    if kind == fg.MULTILABEL and by == "gain":
        from foldcorr.errors import OptionError

        raise OptionError("`rank_by` 'gain' applies to classes; rank labels by share, mcc, "
                          "recall or precision")


def _flag_notes(per_class: xr.Dataset) -> list[str]:
    """One warning per flag (:data:`foldcorr.decomposition.FLAGS`) naming the classes raising it."""
    bits = per_class["flags"].values
    labels = per_class.coords[CLASS].values
    notes = []
    for i, word in enumerate(FLAGS):
        named = [repr(py_value(label)) for label in labels[(bits >> i & 1) > 0]]
        if named:
            shown = ", ".join(named[:m.MAX_PLACES])
            more = f" and {len(named) - m.MAX_PLACES} more" if len(named) > m.MAX_PLACES else ""
            notes.append(f"{word}: class {shown}{more}")
    return notes


def _accuracy_hides(pooled: xr.Dataset, per_class: xr.Dataset) -> list[str]:
    acc, rk = float(pooled["accuracy"]), float(pooled["rk"])
    # R_K is 0/0 unless truth and predictions each cover at least two classes; then the
    # undefined warning already says so, and "R_K is only 0.000" would mislead.
    rk_defined = all(int((per_class[v] > 0).sum()) >= 2 for v in ("in_truth", "predicted"))
    if rk_defined and acc >= ACCURACY_LOOKS_GOOD and rk < ACCURACY_HIDES_RK:
        return [
            f"accuracy is {acc:.3f} but R_K is only {rk:.3f}: the accuracy comes mostly from "
            "frequent classes, and the predictions are weakly correlated with the truth once "
            "class imbalance is accounted for"
        ]
    return []

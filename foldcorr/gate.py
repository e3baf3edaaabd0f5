r"""The CI gate: rules over an evaluation, each with its value, threshold and verdict.

A gate holds when every rule given holds. The rules:

``min_rk``
    pooled R_K >= X (multiclass).
``min_micro_mcc``
    pooled micro MCC (the tensor summed over labels) >= X (multilabel).
``min_macro_mcc``
    pooled macro MCC >= X: the mean one-vs-rest MCC over classes, or the mean
    MCC over the labels present (both kinds).
``min_fold_rk``
    R_K of every fold >= X (the value shown is the lowest fold's).
``min_class_mcc``
    one-vs-rest MCC of every class (multiclass) or MCC of every label
    (multilabel) >= X (the value shown is the lowest).
``class_floors``
    MCC of each listed class or label >= its own floor; the value shown is
    the smallest margin MCC - floor, held against 0.
``max_marginal_mismatch``
    the marginal mismatch term 1 - sum_k w_k of the decomposition <= X.
``max_drop``
    against a baseline, the drop R_K(baseline) - R_K(current) <= D. With a
    confidence level the drop counts as a regression only when the whole
    bootstrap interval of the drop lies above D.

Rules of the other kind are refused (:data:`RULES_BY_KIND`): a multilabel
evaluation has no R_K, fold R_K, marginal mismatch or baseline drop of R_K.

An undefined figure (NaN under ``undefined="nan"``) fails its rule: a gate
cannot vouch for a value it could not compute.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
import xarray as xr

from foldcorr import metrics as m
from foldcorr.errors import DEFAULT_SEED, InvalidInputError, OptionError, UndefinedMetricWarning
from foldcorr.evaluation import Evaluation
from foldcorr.tensor.samples import Samples, align_samples
from foldcorr.tensor import ACTUAL, FOLD, PREDICTED, pool

__all__ = ["GateRules", "RuleResult", "ClassShortfall", "GateResult", "check_gate",
           "RULE_TITLES", "RULES_BY_KIND"]

#: Rule names (the JSON ``rule`` key) and their titles in the text table.
RULE_TITLES = {
    "min_rk": "pooled R_K",
    "min_micro_mcc": "pooled micro MCC",
    "min_macro_mcc": "pooled macro MCC",
    "min_fold_rk": "R_K of every fold",
    "min_class_mcc": "MCC of every class",
    "class_floors": "MCC above class floors",
    "max_marginal_mismatch": "marginal mismatch",
    "max_drop": "drop in R_K from baseline",
    "min_group_rk": "R_K of class groups",
}

#: The rules each kind of evaluation can be held to.
RULES_BY_KIND = {
    "multiclass": ("min_rk", "min_macro_mcc", "min_fold_rk", "min_class_mcc", "class_floors",
                   "max_marginal_mismatch", "max_drop", "min_group_rk"),
    "multilabel": ("min_micro_mcc", "min_macro_mcc", "min_class_mcc", "class_floors"),
}
#: Rules that compare a pooled figure with a lower bound: rule -> figure key.
_POOLED_RULES = {"min_rk": "rk", "min_micro_mcc": "micro_mcc", "min_macro_mcc": "macro_mcc"}


@dataclass(frozen=True)
class GateRules:
    """The thresholds of a gate; rules left as None are not checked.

    Attributes
    ----------
    min_rk, min_fold_rk, min_class_mcc : float or None
        Lower bounds of pooled R_K, of every fold's R_K and of every class's
        one-vs-rest MCC (every label's MCC for a multilabel evaluation).
    min_micro_mcc, min_macro_mcc : float or None
        Lower bounds of pooled micro MCC (multilabel) and macro MCC.
    class_floors : mapping or None
        Class (or label) -> lower bound of its MCC.
    max_marginal_mismatch : float or None
        Upper bound of the marginal mismatch term.
    max_drop : float or None
        Upper bound of R_K(baseline) - R_K(current); needs a baseline.
    confidence : float or None
        Level of the bootstrap interval of the drop (e.g. 0.95); without it
        the drop is compared as it stands.
    allow_new_classes : bool
        Compare with a baseline that has other classes, on the shared ones.
    n_resamples : int
        Bootstrap resamples for the interval of the drop.
    seed : int or None
        Seed of the bootstrap (:data:`foldcorr.errors.DEFAULT_SEED` unless given, so
        that a gate gives the same verdict on every run).
    min_group_rk : mapping or None
        Level of class groups -> lower bound of the R_K of the tensor merged
        by that level's groups (a key None: every level).
    groups : mapping or None
        Level -> (class -> group), as ``foldcorr.sources.groups.read_groups`` reads them.
    groups_other : str or None
        The group of classes missing from a level (else they are an error).
    """

    min_rk: float | None = None
    min_micro_mcc: float | None = None
    min_macro_mcc: float | None = None
    min_fold_rk: float | None = None
    min_class_mcc: float | None = None
    class_floors: Mapping | None = None
    max_marginal_mismatch: float | None = None
    max_drop: float | None = None
    confidence: float | None = None
    allow_new_classes: bool = False
    n_resamples: int = 2000
    seed: int | None = DEFAULT_SEED
    min_group_rk: Mapping | None = None
    groups: Mapping | None = None
    groups_other: str | None = None

    def __post_init__(self):
        for name in ("min_rk", "min_micro_mcc", "min_macro_mcc", "min_fold_rk", "min_class_mcc",
                     "max_marginal_mismatch", "max_drop"):
            value = getattr(self, name)
            if value is not None and not (isinstance(value, (int, float)) and math.isfinite(value)):
                raise OptionError(f"`{name}` must be a finite number; got {value!r}")
        if self.confidence is not None and not (0 < self.confidence < 1):
            raise OptionError(f"`confidence` must lie strictly between 0 and 1; "
                              f"got {self.confidence!r}")
        if self.min_group_rk is not None:
            _check_group_rule(self.min_group_rk, self.groups)
        if self.n_resamples < 1:
            raise OptionError(f"`n_resamples` must be at least 1; got {self.n_resamples!r}")

    @property
    def empty(self) -> bool:
        """Whether no rule is set."""
        return not self.given

    @property
    def given(self) -> tuple:
        """The names of the rules set, in :data:`RULE_TITLES` order."""
        return tuple(n for n in RULE_TITLES if getattr(self, n) not in (None, {}))


@dataclass(frozen=True)
class RuleResult:
    """One rule checked.

    Attributes
    ----------
    rule : str
        Rule name (see :data:`RULE_TITLES`).
    value : float
        The figure checked (NaN where undefined).
    threshold : float
        The bound it is held against.
    op : str
        ``">="`` or ``"<="``: how value and threshold must compare.
    passed : bool
        Whether the rule holds.
    detail : str
        A sentence with what the figure is and where it fell short.
    interval : tuple of float or None
        ``(low, high)`` bootstrap interval of the figure (the drop, with a
        confidence level), or None.
    where : str
        Where the value comes from when it is one of many (the lowest fold or
        class, the class nearest its floor), else "".
    """

    rule: str
    value: float
    threshold: float
    op: str
    passed: bool
    detail: str = ""
    interval: tuple[float, float] | None = None
    where: str = ""

    @property
    def title(self) -> str:
        """Human title of the rule."""
        return RULE_TITLES.get(self.rule, self.rule)


@dataclass(frozen=True)
class ClassShortfall:
    """A class whose one-vs-rest MCC fell below its floor.

    Attributes
    ----------
    label : object
        Class label.
    mcc, floor : float
        Its MCC and the floor it missed.
    in_truth : float
        Its number of samples in the truth (actual class).
    rule : str
        The rule it failed (``min_class_mcc`` or ``class_floors``).
    """

    label: object
    mcc: float
    floor: float
    in_truth: float
    rule: str


@dataclass(frozen=True)
class GateResult:
    """The outcome of a gate.

    Attributes
    ----------
    passed : bool
        Whether every rule holds.
    rules : tuple of RuleResult
        Every rule checked, in a fixed order.
    failing_classes : tuple of ClassShortfall
        Classes below their floors, over every rule, the furthest below
        first (an undefined MCC first of all; ties in rule order).
    evaluation : Evaluation
        The evaluation gated.
    baseline : Evaluation or None
        The baseline compared against.
    comparison : str
        ``"paired"``, ``"unpaired"`` or ``"plain"`` (no interval), or "" without
        a baseline.
    warnings : tuple of str
        The evaluation's warnings and notes on the comparison.
    seed : int or None
        Seed of the baseline interval's bootstrap (None when none was drawn).
    """

    passed: bool
    rules: tuple[RuleResult, ...]
    failing_classes: tuple[ClassShortfall, ...]
    evaluation: Evaluation
    baseline: Evaluation | None = None
    comparison: str = ""
    warnings: tuple[str, ...] = field(default_factory=tuple)
    seed: int | None = None

    @property
    def failed(self) -> tuple[RuleResult, ...]:
        """The rules that failed."""
        return tuple(r for r in self.rules if not r.passed)

    def _repr_html_(self) -> str:
        from foldcorr.report.notebook import html_fragment  # rendering lives in the report layer

        return html_fragment(self)

    def __repr__(self) -> str:
        failed = ", ".join(r.rule for r in self.failed) or "none"
        return (f"GateResult({'PASS' if self.passed else 'FAIL'}, {len(self.rules)} rules, "
                f"failed: {failed}, {len(self.failing_classes)} classes below floors)")


def _holds(value: float, threshold: float, op: str) -> bool:
    if value is None or not math.isfinite(value):
        return False
    return value >= threshold if op == ">=" else value <= threshold


def _f(value) -> str:
    if value is None or not math.isfinite(value):
        return "n/a"
    text = f"{value:.3f}"
    return "0.000" if text == "-0.000" else text


def _signed(value) -> str:
    text = _f(value)
    return text if text.startswith("-") or text in ("n/a", "0.000") else f"+{text}"


def _listed(items: list[str], limit: int = 5) -> str:
    shown = "; ".join(items[:limit])
    return shown + (f"; and {len(items) - limit} more" if len(items) > limit else "")


def check_gate(ev: Evaluation, rules: GateRules, *, baseline: Evaluation | None = None,
               samples: Samples | None = None,
               baseline_samples: Samples | None = None) -> GateResult:
    r"""Check an evaluation against the rules of a gate.

    Parameters
    ----------
    ev : Evaluation
        The evaluation to gate.
    rules : GateRules
        The thresholds.
    baseline : Evaluation, optional
        The baseline, needed by ``max_drop``.
    samples, baseline_samples : Samples, optional
        Per-sample labels of both; when both are given and hold the same
        samples, the interval of the drop is paired.

    Returns
    -------
    GateResult

    Raises
    ------
    OptionError
        When no rule is given, ``max_drop`` lacks a baseline, or
        ``min_fold_rk`` is asked of an evaluation without folds.
    InvalidInputError
        When the baseline has other classes and ``allow_new_classes`` is
        false (the message says which were added and removed).

    Notes
    -----
    The drop is :math:`\Delta = R_K(\text{baseline}) - R_K(\text{current})` on
    the tensors pooled over folds. With a confidence level :math:`1-\alpha`
    the rule fails only when the lower end of the bootstrap interval of
    :math:`\Delta` exceeds D.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> ev = evaluate(confusion_tensor([[4, 1, 0], [0, 3, 1], [2, 0, 5]], ["a", "b", "c"]))
    >>> result = check_gate(ev, GateRules(min_rk=0.6, min_class_mcc=0.6))
    >>> [(r.rule, round(r.value, 3), r.passed) for r in result.rules]
    [('min_rk', 0.623, True), ('min_class_mcc', 0.592, False)]
    >>> result.passed, [c.label for c in result.failing_classes]
    (False, ['a'])
    """
    if rules.empty:
        raise OptionError("the gate has no rules; give at least one of --min-rk, "
                          "--min-micro-mcc, --min-macro-mcc, --min-fold-rk, --min-class-mcc, "
                          "--class-floors, --max-marginal-mismatch, --min-group-rk, --baseline")
    _check_kind(ev, rules)
    if rules.max_drop is not None and baseline is None:
        raise OptionError("`max_drop` needs a baseline to compare with")
    out: list[RuleResult] = []
    short: list[ClassShortfall] = []
    notes: list[str] = list(ev.warnings)
    comparison = ""
    for name, key in _POOLED_RULES.items():
        bound = getattr(rules, name)
        if bound is not None:
            value = ev.figure(key)
            out.append(RuleResult(name, value, bound, ">=", _holds(value, bound, ">="),
                                  f"pooled over {_count(ev.n)} samples"))
    if rules.min_fold_rk is not None:
        out.append(_fold_rule(ev, rules.min_fold_rk))
    if rules.min_class_mcc is not None:
        floors = {label: rules.min_class_mcc for label in ev.row_names}
        rule, missed = _class_rule(ev, floors, "min_class_mcc")
        out.append(rule)
        short.extend(missed)
    if rules.class_floors:
        rule, missed = _class_rule(ev, dict(rules.class_floors), "class_floors")
        out.append(rule)
        short.extend(missed)
    if rules.max_marginal_mismatch is not None:
        value = ev.figure("marginal_mismatch")
        out.append(RuleResult("max_marginal_mismatch", value, rules.max_marginal_mismatch, "<=",
                              _holds(value, rules.max_marginal_mismatch, "<="),
                              "zero when predicted and actual class frequencies agree"))
    if rules.max_drop is not None:
        rule, comparison, more = _drop_rule(ev, baseline, rules, samples, baseline_samples)
        out.append(rule)
        notes.extend(more)
    if rules.min_group_rk is not None:
        out.append(_group_rule(ev, rules))
    short.sort(key=_furthest_below_first)  # across rules, as documented in docs/json.md
    return GateResult(passed=all(r.passed for r in out), rules=tuple(out),
                      failing_classes=tuple(short), evaluation=ev, baseline=baseline,
                      comparison=comparison, warnings=tuple(dict.fromkeys(notes)),
                      seed=rules.seed if any(r.interval is not None for r in out) else None)


def _check_group_rule(bounds: Mapping, groups: Mapping | None) -> None:
    if not groups:
        raise OptionError("`min_group_rk` needs class groups (`groups`, --groups FILE)")
    for level, bound in bounds.items():
        if level is not None and level not in groups:
            raise OptionError(f"`min_group_rk` names the level {level!r}; the groups have "
                              f"levels {list(groups)!r}")
        if not (isinstance(bound, (int, float)) and math.isfinite(bound)):
            raise OptionError(f"`min_group_rk` must be finite numbers; got {bound!r}")


def _group_rule(ev: Evaluation, rules: GateRules) -> RuleResult:
    """The level of groups whose R_K lies lowest against its bound decides the rule."""
    from foldcorr.analysis.groups import merge_classes

    bounds = dict(rules.min_group_rk)
    if None in bounds:
        every = bounds.pop(None)
        bounds = {level: bounds.get(level, every) for level in rules.groups}
    pooled = pool(ev.tensor)
    values = {level: _quiet_rk(merge_classes(pooled, rules.groups[level],
                                             other=rules.groups_other), ev.undefined)
              for level in bounds}
    margins = {lv: (v - bounds[lv]) if math.isfinite(v) else -math.inf
               for lv, v in values.items()}
    worst = min(margins, key=margins.get)
    detail = "; ".join(f"{lv} {_f(values[lv])} (at least {bounds[lv]:g})" for lv in bounds)
    return RuleResult("min_group_rk", values[worst], bounds[worst], ">=",
                      all(_holds(values[lv], bounds[lv], ">=") for lv in bounds),
                      f"R_K of the classes merged by group: {detail}")


def _check_kind(ev: Evaluation, rules: GateRules) -> None:
    allowed = RULES_BY_KIND[ev.kind]
    wrong = [name for name in rules.given if name not in allowed]
    if wrong:
        raise OptionError(f"`{wrong[0]}` does not apply to a {ev.kind} evaluation; its rules "
                          f"are {', '.join(allowed)}")


def _count(n) -> str:
    return f"{int(n)}" if float(n).is_integer() else f"{float(n):.1f}"


def _fold_rule(ev: Evaluation, threshold: float) -> RuleResult:
    if ev.folds is None:
        raise OptionError("`min_fold_rk` needs folds, and this evaluation has none; use "
                          "`min_rk` for the pooled R_K")
    values = ev.folds["rk"].values.astype(float)
    labels = ev.folds.coords[FOLD].values.tolist()
    bad = [i for i, v in enumerate(values) if not _holds(v, threshold, ">=")]
    finite = np.where(np.isfinite(values), values, np.inf)
    worst = int(np.argmin(finite)) if np.isfinite(finite).any() else 0
    value = float(values[worst]) if np.isfinite(finite).any() else math.nan
    if bad:
        detail = f"{len(bad)} of {len(values)} folds below: " + _listed(
            [f"fold {labels[i]!s} {_f(values[i])}" for i in bad])
    else:
        detail = f"lowest is fold {labels[worst]!s} of {len(values)}"
    return RuleResult("min_fold_rk", value, threshold, ">=", not bad, detail,
                      where=f"fold {labels[worst]!s}")


def _furthest_below_first(c: ClassShortfall) -> float:
    """Sort key of a shortfall: MCC - floor, an undefined MCC first; ties keep their order."""
    return (c.mcc - c.floor) if math.isfinite(c.mcc) else -math.inf


def _class_rule(ev: Evaluation, floors: dict, name: str):
    pc = ev.rows
    labels = ev.row_names
    noun = "labels" if ev.row_scope == "label" else "classes"
    index = {label: i for i, label in enumerate(labels)}
    mcc = pc["mcc"].values.astype(float)
    in_truth = pc["in_truth"].values
    missed, margins = [], []
    for label, floor in floors.items():
        i = index[label]
        margins.append(mcc[i] - floor if math.isfinite(mcc[i]) else math.nan)
        if not _holds(mcc[i], floor, ">="):
            missed.append(ClassShortfall(label, float(mcc[i]), float(floor),
                                         float(in_truth[i]), name))
    missed.sort(key=_furthest_below_first)
    checked = len(floors)
    order = list(floors)
    nearest = order[int(np.argmin([m if math.isfinite(m) else -math.inf for m in margins]))]
    where = (f"{nearest!s} {_f(mcc[index[nearest]])}, floor {float(floors[nearest]):.3f}"
             if name == "class_floors" else
             str(labels[int(np.argmin(np.where(np.isfinite(mcc), mcc, -np.inf)))]))
    if name == "min_class_mcc":
        value = float(np.nanmin(mcc)) if np.isfinite(mcc).any() else math.nan
        if any(not math.isfinite(v) for v in mcc):
            value = math.nan
        threshold = next(iter(floors.values()))
        described = [f"{c.label!s} {_f(c.mcc)}" for c in missed]
        head = "lowest of"
    else:
        value = math.nan if any(not math.isfinite(v) for v in margins) else float(min(margins))
        threshold = 0.0
        described = [f"{c.label!s} {_f(c.mcc)} < {c.floor:.3f}" for c in missed]
        head = "smallest margin MCC - floor over"
    if missed:
        detail = f"{len(missed)} of {checked} {noun} below: " + _listed(described)
    else:
        detail = f"{head} {checked} {noun}"
    return RuleResult(name, value, threshold, ">=", not missed, detail, where=where), missed


def _shared_classes(ev: Evaluation, baseline: Evaluation, allow: bool):
    now, base = ev.classes, baseline.classes
    added = [c for c in now if c not in base]
    removed = [c for c in base if c not in now]
    if not added and not removed:
        return now, []
    if not allow:
        raise InvalidInputError(
            f"the baseline has other classes: added since the baseline {added!r}, removed "
            f"{removed!r}; give --allow-new-classes to compare on the "
            f"{len(now) - len(added)} shared classes only")
    shared = [c for c in now if c in base]
    if not shared:
        raise InvalidInputError("the baseline shares no class with this evaluation")
    return shared, [f"baseline comparison on the {len(shared)} shared classes only: added "
                    f"{added!r}, removed {removed!r}"]


def _restricted(t: xr.DataArray, shared: list) -> xr.DataArray:
    return pool(t).sel({ACTUAL: shared, PREDICTED: shared})


def _quiet_rk(t, undefined: str) -> float:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedMetricWarning)
        return float(m.rk(t, undefined=undefined))


def _drop_rule(ev, baseline, rules: GateRules, samples, baseline_samples):
    shared, notes = _shared_classes(ev, baseline, rules.allow_new_classes)
    now_t, base_t = _restricted(ev.tensor, shared), _restricted(baseline.tensor, shared)
    rk_now, rk_base = _quiet_rk(now_t, ev.undefined), _quiet_rk(base_t, ev.undefined)
    drop = rk_base - rk_now
    where = ""
    if notes:
        left_now = float(pool(ev.tensor).sum()) - float(now_t.sum())
        left_base = float(pool(baseline.tensor).sum()) - float(base_t.sum())
        where = (f" on the {len(shared)} shared classes ({_count(left_now)} current and "
                 f"{_count(left_base)} baseline samples involve other classes and are left out)")
    head = f"R_K {_f(rk_now)} against baseline {_f(rk_base)}{where}"
    if rules.confidence is None:
        passed = _holds(drop, rules.max_drop, "<=")
        return RuleResult("max_drop", drop, rules.max_drop, "<=", passed,
                          f"{head}; change {_signed(-drop)}"), "plain", notes
    from foldcorr.analysis.drop import drop_interval

    low, high, how, more = drop_interval(baseline.tensor, ev.tensor, shared,
                                         baseline_samples=baseline_samples, samples=samples,
                                         n_resamples=rules.n_resamples, level=rules.confidence,
                                         seed=rules.seed)
    passed = not (math.isfinite(low) and low > rules.max_drop)
    if not (math.isfinite(low) and math.isfinite(high)):
        passed = _holds(drop, rules.max_drop, "<=")
    level = f"{rules.confidence * 100:g}%"
    detail = (f"{head}; change {_signed(-drop)}, {level} interval {_signed(-high)} to "
              f"{_signed(-low)} ({how}, seed {rules.seed}); a regression only when the whole "
              f"interval lies below {_signed(-rules.max_drop)}")
    return (RuleResult("max_drop", drop, rules.max_drop, "<=", passed, detail,
                       interval=(low, high)),
            how.split()[0], notes + more)

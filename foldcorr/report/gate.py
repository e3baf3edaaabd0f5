"""Rendering of a gate result: plain table, Markdown summary, JSON and JUnit XML.

The text and Markdown forms come from one :class:`~foldcorr.report.tables.Report`,
so they show the same rows. JSON schema ``foldcorr.gate/2``: ``schema``,
``passed``, ``source``, ``baseline``, ``comparison``, ``seed``, ``rules`` (each with
``rule``, ``figure``, ``value``, ``threshold``, ``op``, ``passed``, ``detail``,
``where``, ``interval``; the baseline rule also ``change`` and ``change_interval``),
``failing_classes`` (each with ``class``, ``mcc``, ``floor``, ``in_truth``,
``rule``) and ``warnings``. JUnit XML: one ``testsuite`` named
``foldcorr gate`` with one ``testcase`` per rule; a failed rule carries a
``failure`` element whose message is the rule's detail.
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET

from foldcorr.gate import GateResult
from foldcorr.report.json import dumps, plain
from foldcorr.report.tables import Column, Report, Table, format_value

__all__ = ["GATE_SCHEMA", "gate_report", "gate_dict", "junit_xml", "gate_document"]

#: Characters XML 1.0 cannot hold even escaped (labels may carry them): shown as U+FFFD.
_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")

GATE_SCHEMA = "foldcorr.gate/2"


def _verdict(passed: bool) -> str:
    return "PASS" if passed else "FAIL"


def _source(ev) -> str:
    return str(ev.tensor.attrs.get("source", "(in memory)"))


def _nouns(ev) -> str:
    return "labels" if ev.row_scope == "label" else "classes"


#: What each rule checks, as the figure named in its row.
RULE_FIGURES = {
    "min_rk": "pooled R_K",
    "min_micro_mcc": "pooled micro MCC",
    "min_macro_mcc": "pooled macro MCC",
    "min_fold_rk": "lowest fold R_K",
    "min_class_mcc": "lowest one-vs-rest MCC",
    "class_floors": "MCC of the classes with floors",
    "max_marginal_mismatch": "marginal mismatch",
    "max_drop": "R_K change from baseline (+ better)",
}

#: Classes below their floors shown in one rule row; the rest are in the floors table.
ROW_CLASSES = 3


def signed(value) -> str:
    """A change with its sign (+ better, - worse), three decimals, never a negative zero.

    Examples
    --------
    >>> signed(0.0123), signed(-0.13), signed(-0.0001)
    ('+0.012', '-0.130', '0.000')
    """
    text = format_value(value, "metric")
    return text if text in ("n/a", "0.000") or text.startswith("-") else "+" + text


def _value(r, result: GateResult) -> str:
    """The text of a rule's value: the figure, where it comes from, the classes below floors."""
    if r.rule == "max_drop":
        text = signed(-r.value)
        if r.interval is not None:
            text += f" ({signed(-r.interval[1])} to {signed(-r.interval[0])})"
        return text
    if r.rule == "class_floors":
        below = [c for c in result.failing_classes if c.rule == r.rule]
        if not below:
            return f"all hold; nearest {r.where}"
        shown = [f"{c.label!s} {format_value(c.mcc, 'metric')} < {c.floor:.3f}"
                 for c in below[:ROW_CLASSES]]
        more = f" and {len(below) - ROW_CLASSES} more" if len(below) > ROW_CLASSES else ""
        return "; ".join(shown) + more
    text = format_value(r.value, "metric")
    return f"{text} ({r.where})" if r.where else text


def _limit(r) -> str:
    if r.rule == "max_drop":
        bound = signed(-r.threshold)
        return f"upper end >= {bound}" if r.interval is not None else f">= {bound}"
    if r.rule == "class_floors":
        return "each >= its floor"
    return f"{r.op} {format_value(r.threshold, 'metric')}"


def gate_report(result: GateResult) -> Report:
    """The gate as a report: facts, one row per rule, the classes below their floors.

    Each rule row names the figure checked, its value, the limit and the
    verdict; the change from a baseline is signed (+ better, - worse), with
    its interval when a confidence level was given.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.gate import GateRules, check_gate
    >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
    >>> r = gate_report(check_gate(ev, GateRules(min_rk=0.5)))
    >>> r.tables[0].rows[0]
    ('pooled R_K', '0.478', '>= 0.500', 'FAIL', 'min-rk')
    """
    ev = result.evaluation
    failed = len(result.failed)
    verdict = (f"PASS (all {len(result.rules)} rules hold)" if result.passed
               else f"FAIL ({failed} of {len(result.rules)} rules failed)")
    facts = [("result", verdict), ("source", _source(ev)),
             ("samples", format_value(ev.n, "count")), (_nouns(ev), str(len(ev.row_names)))]
    if result.baseline is not None:
        facts.append(("baseline", _source(result.baseline)))
        facts.append(("comparison", result.comparison))
    if result.seed is not None:
        facts.append(("seed", str(result.seed)))
    rows = tuple((RULE_FIGURES.get(r.rule, r.title), _value(r, result), _limit(r),
                  _verdict(r.passed), r.rule.replace("_", "-")) for r in result.rules)
    note = "; ".join(f"{RULE_FIGURES.get(r.rule, r.title)}: {r.detail}"
                     for r in result.rules if r.detail and (not r.passed or r.interval))
    rules = Table("Rules", (Column("checks", "text"), Column("value", "text"),
                            Column("limit", "label"), Column("verdict", "text"),
                            Column("rule", "text")), rows, note)
    tables = [rules]
    if result.failing_classes:
        rows = tuple((c.label, c.mcc, c.floor, c.in_truth, c.rule.replace("_", "-"))
                     for c in result.failing_classes)
        tables.append(Table(f"{_nouns(ev).capitalize()} below their floors ({len(rows)})",
                            (Column(ev.row_scope, "label"), Column("MCC", "correlation"),
                             Column("floor"), Column("in truth", "count"),
                             Column("rule", "text")), rows))
    return Report("foldcorr gate", tuple(facts), tuple(tables), result.warnings)


def gate_dict(result: GateResult) -> dict:
    """The ``foldcorr.gate/2`` JSON document.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.gate import GateRules, check_gate
    >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
    >>> doc = gate_dict(check_gate(ev, GateRules(min_rk=0.4)))
    >>> doc["schema"], doc["passed"], doc["rules"][0]["rule"], doc["failing_classes"]
    ('foldcorr.gate/2', True, 'min_rk', [])
    """
    ev = result.evaluation
    doc = {
        "schema": GATE_SCHEMA,
        "passed": result.passed,
        "source": ev.tensor.attrs.get("source"),
        "baseline": None if result.baseline is None else result.baseline.tensor.attrs.get("source"),
        "comparison": result.comparison or None,
        "seed": result.seed,
        "rules": [{"rule": r.rule, "figure": RULE_FIGURES.get(r.rule, r.title),
                   "value": r.value, "threshold": r.threshold, "op": r.op,
                   "passed": r.passed, "detail": r.detail, "where": r.where or None,
                   "interval": None if r.interval is None else list(r.interval),
                   **({"change": -r.value, "change_interval": None if r.interval is None
                       else [-r.interval[1], -r.interval[0]]} if r.rule == "max_drop" else {})}
                  for r in result.rules],
        "failing_classes": [{"class": c.label, "mcc": c.mcc, "floor": c.floor,
                             "in_truth": c.in_truth, "rule": c.rule}
                            for c in result.failing_classes],
        "warnings": list(result.warnings),
    }
    return plain(doc)


def junit_xml(result: GateResult) -> str:
    """A JUnit XML report: one test case per rule, failures with their messages.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.gate import GateRules, check_gate
    >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
    >>> text = junit_xml(check_gate(ev, GateRules(min_rk=0.5, max_marginal_mismatch=0.1)))
    >>> root = ET.fromstring(text)
    >>> root.tag, root.get("tests"), root.find("testsuite").get("failures")
    ('testsuites', '2', '1')
    """
    failures = str(len(result.failed))
    tests = str(len(result.rules))
    root = ET.Element("testsuites", name="foldcorr", tests=tests, failures=failures, errors="0")
    suite = ET.SubElement(root, "testsuite", name="foldcorr gate", tests=tests,
                          failures=failures, errors="0", skipped="0", time="0")
    props = ET.SubElement(suite, "properties")
    ET.SubElement(props, "property", name="source", value=_source(result.evaluation))
    if result.baseline is not None:
        ET.SubElement(props, "property", name="baseline", value=_source(result.baseline))
        ET.SubElement(props, "property", name="comparison", value=result.comparison)
    for r in result.rules:
        value = "n/a" if not math.isfinite(r.value) else f"{r.value:.6g}"
        case = ET.SubElement(suite, "testcase", name=f"{r.rule}: {r.title} {r.op} {r.threshold:g}",
                             classname="foldcorr.gate", time="0")
        summary = f"{r.title} = {value}, required {r.op} {r.threshold:g}"
        if r.passed:
            ET.SubElement(case, "system-out").text = f"{summary}; {r.detail}"
        else:
            failure = ET.SubElement(case, "failure", message=f"{summary}: {r.detail}",
                                    type="threshold")
            failure.text = "\n".join([summary, r.detail, *[
                f"{c.label!s}: MCC {format_value(c.mcc, 'metric')} below floor {c.floor:.3f}"
                for c in result.failing_classes if c.rule == r.rule]])
    ET.indent(root)
    text = ET.tostring(root, encoding="unicode")
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + _NOT_XML.sub("\ufffd", text) + "\n"


def gate_document(result: GateResult, *, top: int | None = None):
    """The :class:`~foldcorr.report.documents.Document` of a gate result (every row shown).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.gate import GateRules, check_gate
    >>> from foldcorr.report import render
    >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
    >>> print(render(check_gate(ev, GateRules(min_rk=0.4)), "markdown").splitlines()[2])
    - **result**: PASS (all 1 rules hold)
    """
    from foldcorr.report.documents import Document

    return Document(gate_report(result), lambda: gate_dict(result))

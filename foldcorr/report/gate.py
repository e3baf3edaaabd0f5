"""Rendering of a gate result: plain table, Markdown summary, JSON and JUnit XML.

The text and Markdown forms come from one :class:`~foldcorr.report.tables.Report`,
so they show the same rows. JSON schema ``foldcorr.gate/1``: ``schema``,
``passed``, ``source``, ``baseline``, ``comparison``, ``rules`` (each with
``rule``, ``value``, ``threshold``, ``op``, ``passed``, ``detail``),
``failing_classes`` (each with ``class``, ``mcc``, ``floor``, ``support``,
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

GATE_SCHEMA = "foldcorr.gate/1"


def _verdict(passed: bool) -> str:
    return "PASS" if passed else "FAIL"


def _source(ev) -> str:
    return str(ev.tensor.attrs.get("source", "(in memory)"))


def _nouns(ev) -> str:
    return "labels" if ev.row_scope == "label" else "classes"


def gate_report(result: GateResult) -> Report:
    """The gate as a report: facts, the rules table, the classes below their floors.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.gate import GateRules, check_gate
    >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
    >>> r = gate_report(check_gate(ev, GateRules(min_rk=0.5)))
    >>> r.tables[0].rows[0][:4]
    ('pooled R_K', 0.4780914437337574, '>= 0.500', 'FAIL')
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
    rows = tuple((r.title, r.value, f"{r.op} {r.threshold:.3f}", _verdict(r.passed), r.detail)
                 for r in result.rules)
    rules = Table("Rules", (Column("rule", "label"), Column("value"), Column("threshold", "text"),
                            Column("result", "text"), Column("detail", "text")), rows)
    tables = [rules]
    if result.failing_classes:
        rows = tuple((c.label, c.mcc, c.floor, c.support, c.rule.replace("_", "-"))
                     for c in result.failing_classes)
        tables.append(Table(f"{_nouns(ev).capitalize()} below their floors ({len(rows)})",
                            (Column(ev.row_scope, "label"), Column("MCC", "correlation"),
                             Column("floor"), Column("support", "count"),
                             Column("rule", "text")), rows))
    return Report("foldcorr gate", tuple(facts), tuple(tables), result.warnings)


def gate_dict(result: GateResult) -> dict:
    """The ``foldcorr.gate/1`` JSON document.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.gate import GateRules, check_gate
    >>> ev = evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))
    >>> doc = gate_dict(check_gate(ev, GateRules(min_rk=0.4)))
    >>> doc["schema"], doc["passed"], doc["rules"][0]["rule"], doc["failing_classes"]
    ('foldcorr.gate/1', True, 'min_rk', [])
    """
    ev = result.evaluation
    doc = {
        "schema": GATE_SCHEMA,
        "passed": result.passed,
        "source": ev.tensor.attrs.get("source"),
        "baseline": None if result.baseline is None else result.baseline.tensor.attrs.get("source"),
        "comparison": result.comparison or None,
        "rules": [{"rule": r.rule, "value": r.value, "threshold": r.threshold, "op": r.op,
                   "passed": r.passed, "detail": r.detail,
                   "interval": None if r.interval is None else list(r.interval)}
                  for r in result.rules],
        "failing_classes": [{"class": c.label, "mcc": c.mcc, "floor": c.floor,
                             "support": c.support, "rule": c.rule}
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

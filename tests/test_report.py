"""Renderers: rich on a StringIO console, Markdown, JSON; the section mechanism."""

import io
import json
import sys
import types

from rich.console import Console

import foldcorr as fc
from foldcorr.report import render_score
from foldcorr.report.sections import SECTIONS
from foldcorr.report.tables import Column, Table, score_report
from foldcorr.report.text import render_text


def evaluation():
    t = fc.tally(["a", "a", "b", "c", "c", "c"], ["a", "b", "b", "c", "c", "a"], folds=[1, 2, 1, 2, 1, 2])
    return fc.evaluate(t)


def test_rich_protocol_and_colour_bands():
    console = Console(file=io.StringIO(), width=120, color_system="truecolor", force_terminal=True)
    console.print(evaluation())
    text = console.file.getvalue()
    assert "\x1b[" in text and "Classes by shortfall share" in text
    plain = Console(file=io.StringIO(), width=120, color_system=None)
    plain.print(evaluation())
    assert "\x1b[" not in plain.file.getvalue()


def test_plain_text_has_stable_width_and_no_trailing_spaces():
    text = render_text(score_report(evaluation()))
    lines = text.splitlines()
    assert all(len(line) <= 120 and line == line.rstrip() for line in lines)


def test_undefined_values_show_as_na():
    t = fc.tally(["a", "a"], ["a", "a"])
    md = render_score(fc.evaluate(t, undefined="nan"), "markdown")
    assert "| R_K | n/a |" in md


def test_json_is_strict():
    doc = render_score(fc.evaluate(fc.tally(["a", "a"], ["a", "a"]), undefined="nan"), "json")
    def refuse(name):
        raise AssertionError(f"non-standard JSON constant {name}")

    assert json.loads(doc, parse_constant=refuse)["pooled"]["rk"] is None


def test_sections_add_columns_tables_and_json(monkeypatch):
    module = types.ModuleType("fake_section")
    module.summary_notes = lambda ev: {"rk": "[0.1, 0.9]"}
    module.fold_columns = lambda ev: [(Column("R_K low"), [0.1, 0.2])]
    module.class_columns = lambda ev: [(Column("gain"), {"a": 0.5})]
    module.tables = lambda ev, top: [Table("Extra", (Column("x", "label"),), (("y",),))]
    module.json = lambda ev, doc: doc.update(extra=True)
    monkeypatch.setitem(sys.modules, "fake_section", module)
    monkeypatch.setitem(SECTIONS, "fake", "fake_section")
    ev = evaluation().with_extra("fake", object())
    text = render_score(ev, "text", top=None)
    assert "[0.1, 0.9]" in text and "R_K low" in text and "gain" in text and "Extra" in text
    assert json.loads(render_score(ev, "json"))["extra"] is True
    assert "fake" not in json.loads(render_score(evaluation(), "json"))

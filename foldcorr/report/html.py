"""Self-contained HTML rendering of a report.

One file, nothing fetched: the styles are inline, plots are inline SVG, and a
small inline script makes every table sortable by clicking a column header
(click again to reverse); a table of classes or labels, and any long table,
has a box above it that keeps only the rows whose name (first column) holds
the text typed. Headers stay in view while a long table
scrolls. It renders the same :class:`~foldcorr.report.tables.Report` the text
and Markdown renderers take, with every row, so every class and every section
an analysis adds shows up here too. The verdict (of a gate) and the warnings
come first. Each cell keeps its raw value in ``data-value`` so that sorting is
numeric where the column is; undefined values (``n/a``) sort last.
Correlation cells are coloured on the continuous scale of
:func:`foldcorr.report.colours.mcc_colour`, drawn as a legend at the top; the
colour only repeats the printed number.
"""

from __future__ import annotations

import html
import math
import re

from foldcorr.report.colours import mcc_colour, scale_stops
from foldcorr.report.tables import Report, Table, legend

__all__ = ["render_html", "html_table", "svg_figures", "scale_legend", "PLOT_CAPTIONS",
           "MULTILABEL_CAPTIONS"]

#: Captions of the plots of :mod:`foldcorr.report.plots`, by figure name, in page order.
PLOT_CAPTIONS = {
    "loss_budget": "Loss budget: where 1 - R_K goes, class by class, plus the marginal mismatch",
    "confusion": "Confusion heatmap (rows actual, columns predicted)",
    "folds": "R_K per fold",
    "class_fold": "Per-class MCC fold by fold, classes with the largest shortfall share first",
}

#: The captions that differ for a multilabel evaluation.
MULTILABEL_CAPTIONS = {
    "loss_budget": "Loss budget: where 1 - macro MCC goes, label by label",
    "folds": "macro MCC per fold",
}

_CSS = """
:root { color-scheme: light; --ink: #1d232a; --muted: #5b6672; --line: #d5dbe1;
  --head: #eef2f5; --pass: #135fa8; --fail: #8e3b8a; }
* { box-sizing: border-box; }
body { margin: 0; font: 15px/1.45 system-ui, -apple-system, "Segoe UI", sans-serif;
  color: var(--ink); background: #fff; }
main { max-width: 1680px; margin: 0 auto; padding: 24px 28px 48px; }
h1 { font-size: 1.6em; margin: 0 0 8px; }
h2 { font-size: 1.15em; margin: 28px 0 8px; }
dl.facts { display: flex; flex-wrap: wrap; gap: 6px 22px; margin: 0 0 12px; }
dl.facts div { display: flex; gap: 6px; }
dl.facts dt { color: var(--muted); }
dl.facts dd { margin: 0; font-weight: 600; }
.scroll { overflow: auto; max-height: 80vh; }
thead th { position: sticky; top: 0; z-index: 1; }
input.filter { margin: 0 0 6px; padding: 3px 6px; font: inherit; width: 18em; }
.verdict { font-size: 1.2em; font-weight: 700; margin: 8px 0; }
.verdict.pass { color: var(--pass); } .verdict.fail { color: var(--fail); }
.scale { display: flex; align-items: center; gap: 8px; color: var(--muted); margin: 8px 0; }
.scale .bar { width: 240px; height: 12px; border: 1px solid var(--line); }
table { border-collapse: collapse; font-variant-numeric: tabular-nums; font-size: 14px; }
p.note, figcaption { max-width: 60em; }
th, td { padding: 4px 10px; border-bottom: 1px solid var(--line); text-align: left;
  white-space: nowrap; }
th { background: var(--head); font-weight: 600; }
th.num, td.num { text-align: right; }
td.text { white-space: normal; max-width: 40em; }
th button { all: unset; cursor: pointer; }
th button:focus-visible { outline: 2px solid #2a6fb0; }
th[aria-sort="ascending"] button::after { content: " \\25B2"; }
th[aria-sort="descending"] button::after { content: " \\25BC"; }
tbody tr:hover { background: #f7f9fb; }
td.corr { font-weight: 600; }
td.pass { color: var(--pass); font-weight: 700; }
td.fail { color: var(--fail); font-weight: 700; }
p.legend { color: var(--muted); font-style: italic; margin: 4px 0 0; max-width: 60em; }
p.note { color: var(--muted); margin: 6px 0 0; }
ul.warnings li { margin: 4px 0; }
figure { margin: 12px 0 20px; }
figure svg { max-width: 100%; height: auto; }
figcaption { color: var(--muted); }
footer { color: var(--muted); margin-top: 36px; font-size: 0.9em; }
"""

_SCRIPT = """
(function () {
  function key(cell) {
    var raw = cell.getAttribute("data-value");
    if (raw === null || raw === "") return null;
    var num = Number(raw);
    return isNaN(num) ? raw.toLowerCase() : num;
  }
  function sortBy(table, col, descending) {
    var body = table.tBodies[0];
    var rows = Array.prototype.slice.call(body.rows);
    rows.sort(function (a, b) {
      var x = key(a.cells[col]), y = key(b.cells[col]);
      if (x === null && y === null) return 0;
      if (x === null) return 1;
      if (y === null) return -1;
      if (typeof x !== typeof y) { x = String(x); y = String(y); }
      var order = x < y ? -1 : x > y ? 1 : 0;
      return descending ? -order : order;
    });
    rows.forEach(function (row) { body.appendChild(row); });
    Array.prototype.forEach.call(table.tHead.rows[0].cells, function (th, i) {
      if (i === col) th.setAttribute("aria-sort", descending ? "descending" : "ascending");
      else th.removeAttribute("aria-sort");
    });
  }
  document.querySelectorAll("input.filter").forEach(function (box) {
    var table = document.getElementById(box.getAttribute("data-table"));
    box.addEventListener("input", function () {
      var words = box.value.toLowerCase();
      Array.prototype.forEach.call(table.tBodies[0].rows, function (row) {
        var name = row.cells[0].textContent.toLowerCase();
        row.hidden = words !== "" && name.indexOf(words) < 0;
      });
    });
  });
  document.querySelectorAll("table.sortable").forEach(function (table) {
    Array.prototype.forEach.call(table.tHead.rows[0].cells, function (th, col) {
      var button = th.querySelector("button");
      if (!button) return;
      button.addEventListener("click", function () {
        var descending = th.getAttribute("aria-sort") === "ascending";
        sortBy(table, col, descending);
      });
    });
  });
})();
"""


def _slug(text: str) -> str:
    return re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-") or "table"


def _raw(value) -> str:
    if value is None:
        return ""
    if hasattr(value, "item"):
        value = value.item()
    if isinstance(value, float):
        return "" if math.isnan(value) else repr(value)
    return str(value)


def _colour_style(value) -> str:
    try:
        colour = mcc_colour(value)
    except (TypeError, ValueError):
        return ""
    return f' style="color: {colour}"' if colour else ""


def scale_legend() -> str:
    """The colour scale of correlations drawn as a bar from -1 to 1, for the top of a page.

    Examples
    --------
    >>> "linear-gradient(to right, #8e3b8a 0%" in scale_legend()
    True
    """
    stops = ", ".join(f"{colour} {(value + 1) * 50:g}%" for value, colour in scale_stops())
    return ('<div class="scale" id="colour-scale"><span>MCC and R_K colour: -1</span>'
            f'<span class="bar" style="background: linear-gradient(to right, {stops})"></span>'
            "<span>+1 (continuous; the number is always printed)</span></div>")


def html_table(table: Table, *, table_id: str | None = None) -> str:
    """One table as an HTML section with a sortable ``<table>``.

    Examples
    --------
    >>> from foldcorr.report.tables import Column
    >>> out = html_table(Table("T", (Column("a", "label"), Column("b")), (("x", 0.5),)))
    >>> '<td class="num" data-value="0.5">0.500</td>' in out
    True
    """
    tid = table_id or _slug(table.title)
    head = []
    box = ""
    if len(table.rows) > 10 or (table.columns and table.columns[0].title in ("class", "label")):
        box = (f'<input type="search" class="filter" data-table="{tid}-table" '
               f'placeholder="find by name" aria-label="filter {html.escape(table.title)}">')
    for col in table.columns:
        cls = ' class="num"' if col.numeric else ""
        head.append(f'<th scope="col"{cls}><button type="button">{html.escape(col.title)}'
                    "</button></th>")
    body = []
    for raw, cells in zip(table.rows, table.cells()):
        tds = []
        for value, cell, col in zip(raw, cells, table.columns):
            classes = ["num"] if col.numeric else (["text"] if col.kind == "text" else [])
            style = ""
            if col.kind == "correlation" and cell != "n/a":
                classes.append("corr")
                style = _colour_style(value)
            if col.kind == "text" and cell in ("PASS", "FAIL"):
                classes.append(cell.lower())
            cls = f' class="{" ".join(classes)}"' if classes else ""
            tds.append(f'<td{cls}{style} data-value="{html.escape(_raw(value))}">'
                       f"{html.escape(cell)}</td>")
        body.append("<tr>" + "".join(tds) + "</tr>")
    parts = [f'<section id="{tid}">', f"<h2>{html.escape(table.title)}</h2>", box,
             '<div class="scroll">',
             f'<table class="sortable" id="{tid}-table"><thead><tr>{"".join(head)}</tr></thead>',
             "<tbody>", *body, "</tbody></table></div>"]
    if table.note:
        parts.append(f'<p class="note">{html.escape(table.note)}</p>')
    words = legend(table.columns)
    if words:
        parts.append(f'<p class="legend">{html.escape(words)}</p>')
    parts.append("</section>")
    return "\n".join(parts)


def render_html(report: Report, *, figures=(), plots_note: str = "") -> str:
    """A whole report as one self-contained HTML page.

    Parameters
    ----------
    report : Report
        The report (see :func:`foldcorr.report.tables.score_report`).
    figures : sequence of (str, str)
        ``(caption, svg)`` pairs shown in a Plots section; ``svg`` is an
        inline ``<svg>`` document.
    plots_note : str, optional
        Shown in the Plots section in place of plots (e.g. how to get them).

    Returns
    -------
    str
        The HTML document.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.report.tables import score_report
    >>> page = render_html(score_report(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))))
    >>> page.startswith("<!DOCTYPE html>"), "http" in page.split("<body>")[1]
    (True, False)
    """
    source = dict(report.facts).get("source", "")
    title = f"{report.title}: {source}" if source else report.title
    facts = "".join(f"<div><dt>{html.escape(k)}</dt><dd>{html.escape(v)}</dd></div>"
                    for k, v in report.facts)
    used: dict[str, int] = {}
    sections = []
    for table in report.tables:
        slug = _slug(table.title.split("(")[0])
        used[slug] = used.get(slug, 0) + 1
        sections.append(html_table(table, table_id=slug if used[slug] == 1
                                   else f"{slug}-{used[slug]}"))
    if figures or plots_note:
        plot_parts = ['<section id="plots">', "<h2>Plots</h2>"]
        for caption, svg in figures:
            plot_parts.append(f"<figure>{_strip_xml_header(svg)}"
                              f"<figcaption>{html.escape(caption)}</figcaption></figure>")
        if plots_note:
            plot_parts.append(f'<p class="note">{html.escape(plots_note)}</p>')
        plot_parts.append("</section>")
        sections.append("\n".join(plot_parts))
    top = []
    result = dict(report.facts).get("result", "")
    if result:
        verdict = "pass" if result.startswith("PASS") else "fail"
        top.append(f'<p class="verdict {verdict}" id="verdict">{html.escape(result)}</p>')
    if report.warnings:
        items = "".join(f"<li>{html.escape(w)}</li>" for w in report.warnings)
        top.append(f'<section id="warnings"><h2>Warnings</h2>'
                   f'<ul class="warnings">{items}</ul></section>')
    if any(c.kind == "correlation" for t in report.tables for c in t.columns):
        top.append(scale_legend())
    from foldcorr._version import __version__

    return "\n".join([
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{html.escape(title)}</title>",
        f"<style>{_CSS}</style>",
        "</head>",
        "<body>",
        "<main>",
        f"<h1>{html.escape(report.title)}</h1>",
        f'<dl class="facts">{facts}</dl>',
        *top,
        *sections,
        f"<footer>foldcorr {html.escape(__version__)}; click a column header to sort "
        "the table by it; type in the box above a table to find rows by name.</footer>",
        "</main>",
        f"<script>{_SCRIPT}</script>",
        "</body>",
        "</html>",
        "",
    ])


def svg_figures(ev) -> tuple[list[tuple[str, str]], str]:
    """The plots of an evaluation as inline SVG, or a note saying why there are none.

    Returns
    -------
    tuple
        ``(figures, note)``: a list of ``(caption, svg)`` pairs, and "" or a
        sentence shown instead of plots (when matplotlib, from the ``plot``
        extra, is not installed).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> figures, note = svg_figures(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])))
    >>> all(svg.lstrip().startswith("<svg") for _, svg in figures)
    True
    """
    import importlib.util

    if importlib.util.find_spec("foldcorr.report.plots") is None:
        return [], ""
    if importlib.util.find_spec("matplotlib") is None:
        return [], ("The plots need matplotlib, from the plot extra, which is not installed "
                    "here.")
    from foldcorr.report import plots

    captions = {**PLOT_CAPTIONS, **(MULTILABEL_CAPTIONS if ev.kind == "multilabel" else {})}
    return [(captions.get(name, name.replace("_", " ")),
             _strip_xml_header(plots.figure_svg(fig)))
            for name, fig in plots.figures(ev).items()], ""


def _strip_xml_header(svg: str) -> str:
    """Drop the XML declaration and DOCTYPE so the SVG can sit inside HTML."""
    start = svg.find("<svg")
    return svg[start:] if start >= 0 else svg

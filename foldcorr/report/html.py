"""Self-contained HTML rendering of a report.

One file, nothing fetched: the styles are inline, plots are inline SVG, and a
small inline script makes every table sortable by clicking a column header
(click again to reverse). It renders the same :class:`~foldcorr.report.tables.Report`
the text and Markdown renderers take, so every section an analysis adds shows
up here too. Each cell keeps its raw value in ``data-value`` so that sorting
is numeric where the column is; undefined values (``n/a``) sort last.
Correlation cells also carry a band class (good, middling, poor) that only
repeats what the number says.
"""

from __future__ import annotations

import html
import math
import re

from foldcorr.report.tables import Report, Table

__all__ = ["render_html", "html_table", "svg_figures", "PLOT_CAPTIONS", "MULTILABEL_CAPTIONS"]

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
  --head: #eef2f5; --good: #1d6b35; --mid: #8a5a00; --poor: #a3201b; }
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
.scroll { overflow-x: auto; }
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
td.good { color: var(--good); font-weight: 600; }
td.mid { color: var(--mid); }
td.poor { color: var(--poor); font-weight: 600; }
td.pass { color: var(--good); font-weight: 700; }
td.fail { color: var(--poor); font-weight: 700; }
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


def _band(value) -> str:
    from foldcorr.report.text import correlation_style

    style = correlation_style(None if value is None else float(value))
    return {"bold green": "good", "yellow": "mid", "bold red": "poor"}.get(style, "")


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
    for col in table.columns:
        cls = ' class="num"' if col.numeric else ""
        head.append(f'<th scope="col"{cls}><button type="button">{html.escape(col.title)}'
                    "</button></th>")
    body = []
    for raw, cells in zip(table.rows, table.cells()):
        tds = []
        for value, cell, col in zip(raw, cells, table.columns):
            classes = ["num"] if col.numeric else (["text"] if col.kind == "text" else [])
            if col.kind == "correlation":
                band = _band(value) if cell != "n/a" else ""
                classes += [band] if band else []
            if col.kind == "text" and cell in ("PASS", "FAIL"):
                classes.append(cell.lower())
            cls = f' class="{" ".join(classes)}"' if classes else ""
            tds.append(f'<td{cls} data-value="{html.escape(_raw(value))}">{html.escape(cell)}'
                       "</td>")
        body.append("<tr>" + "".join(tds) + "</tr>")
    parts = [f'<section id="{tid}">', f"<h2>{html.escape(table.title)}</h2>",
             '<div class="scroll">',
             f'<table class="sortable" id="{tid}-table"><thead><tr>{"".join(head)}</tr></thead>',
             "<tbody>", *body, "</tbody></table></div>"]
    if table.note:
        parts.append(f'<p class="note">{html.escape(table.note)}</p>')
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
    if report.warnings:
        items = "".join(f"<li>{html.escape(w)}</li>" for w in report.warnings)
        sections.append(f'<section id="warnings"><h2>Warnings</h2>'
                        f'<ul class="warnings">{items}</ul></section>')
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
        *sections,
        f"<footer>foldcorr {html.escape(__version__)}; click a column header to sort "
        "the table by it.</footer>",
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
        return [], ("The plots need matplotlib, from the plot extra: "
                    "pip install 'foldcorr[plot]'")
    from foldcorr.report import plots

    captions = {**PLOT_CAPTIONS, **(MULTILABEL_CAPTIONS if ev.kind == "multilabel" else {})}
    return [(captions.get(name, name.replace("_", " ")),
             _strip_xml_header(plots.figure_svg(fig)))
            for name, fig in plots.figures(ev).items()], ""


def _strip_xml_header(svg: str) -> str:
    """Drop the XML declaration and DOCTYPE so the SVG can sit inside HTML."""
    start = svg.find("<svg")
    return svg[start:] if start >= 0 else svg

"""Rendering of any :class:`~foldcorr.report.tables.Report` with its JSON document.

Reports other than ``score`` (multilabel, sweep) build a ``Report`` for text
and Markdown and a separate JSON document; this picks one by format.
"""

from __future__ import annotations

from foldcorr.report.tables import Report

__all__ = ["render_report"]


def render_report(report: Report, make_json, fmt: str) -> str:
    """Render a :class:`Report` as text or Markdown, or ``make_json()`` as JSON.

    Examples
    --------
    >>> render_report(Report("t", (), ()), lambda: {"schema": "x"}, "json")
    '{\\n  "schema": "x"\\n}\\n'
    """
    from foldcorr.errors import check_choice
    from foldcorr.report import FORMATS

    check_choice("format", fmt, FORMATS)
    if fmt == "json":
        from foldcorr.report.json import dumps

        return dumps(make_json())
    if fmt == "markdown":
        from foldcorr.report.markdown import render_markdown

        return render_markdown(report)
    if fmt == "html":
        from foldcorr.report.html import render_html

        return render_html(report)
    from foldcorr.report.text import render_text

    return render_text(report)

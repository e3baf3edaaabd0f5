"""One way to write any result in any output format.

Every result renders through a :class:`Document`: the report's tables (for
text, Markdown and HTML) and its JSON document. :data:`foldcorr.report.formats.WRITERS`
names, once, the function that writes a Document in each format, so a new
output format is one function here and one line there.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from foldcorr.report.tables import Report

__all__ = ["Document", "write", "write_to", "write_text", "write_json", "write_markdown",
           "write_html"]


def _no_figures() -> tuple[list, str]:
    return [], ""


@dataclass(frozen=True)
class Document:
    """A result made ready for every output format.

    Attributes
    ----------
    report : Report
        Facts, tables and warnings, shared by text, Markdown and HTML.
    make_json : callable
        Returns the versioned JSON document (built only when JSON is asked for).
    figures : callable
        Returns ``(figures, note)``: the plots as ``(caption, svg)`` pairs for
        HTML, and "" or why there are none (drawn only when HTML is asked for).
    """

    report: Report
    make_json: Callable[[], dict]
    figures: Callable[[], tuple[list, str]] = _no_figures


def write_text(doc: Document) -> str:
    """Plain text without colour (see :func:`foldcorr.report.text.render_text`)."""
    from foldcorr.report.text import render_text

    return render_text(doc.report)


def write_json(doc: Document) -> str:
    """The JSON document, indented, strict (see :func:`foldcorr.report.json.dumps`)."""
    from foldcorr.report.json import dumps

    return dumps(doc.make_json())


def write_markdown(doc: Document) -> str:
    """Markdown for CI summaries (see :func:`foldcorr.report.markdown.render_markdown`)."""
    from foldcorr.report.markdown import render_markdown

    return render_markdown(doc.report)


def write_html(doc: Document) -> str:
    """One self-contained HTML page (see :func:`foldcorr.report.html.render_html`)."""
    from foldcorr.report.html import render_html

    figures, note = doc.figures()
    return render_html(doc.report, figures=figures, plots_note=note)


def write(doc: Document, fmt: str) -> str:
    """Write a Document in one of :data:`foldcorr.report.FORMATS`.

    Examples
    --------
    >>> write(Document(Report("t", (), ()), lambda: {"schema": "x"}), "json")
    '{\\n  "schema": "x"\\n}\\n'
    """
    import importlib

    from foldcorr.errors import check_choice
    from foldcorr.report.formats import FORMATS, WRITERS

    check_choice("format", fmt, FORMATS)
    module, name = WRITERS[fmt].split(":")
    return getattr(importlib.import_module(module), name)(doc)


def write_to(doc: Document, fmt: str, out) -> None:
    """Write a Document in ``fmt`` to a text stream; JSON piece by piece, never one string.

    Examples
    --------
    >>> import io
    >>> out = io.StringIO()
    >>> write_to(Document(Report("t", (), ()), lambda: {"schema": "x"}), "json", out)
    >>> out.getvalue()
    '{\\n  "schema": "x"\\n}\\n'
    """
    if fmt == "json":
        from foldcorr.report.json import dump

        dump(doc.make_json(), out)
    else:
        out.write(write(doc, fmt))

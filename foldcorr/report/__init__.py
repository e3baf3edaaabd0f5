"""The report layer: an evaluation in, text out (terminal, plain, Markdown, JSON, HTML).

Renderers take result objects and never compute a metric.
"""

from __future__ import annotations

__all__ = ["FORMATS", "render_score"]

FORMATS = ("text", "json", "markdown", "html")


def render_score(ev, fmt: str, *, top: int | None = 20) -> str:
    """Render an evaluation in one of :data:`FORMATS` as plain text (no colour).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> render_score(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])), "json")[:32]
    '{\\n  "schema": "foldcorr.score/1"'
    """
    from foldcorr.errors import check_choice

    check_choice("format", fmt, FORMATS)
    if fmt == "json":
        from foldcorr.report.json import dumps, score_dict

        return dumps(score_dict(ev))
    from foldcorr.report.tables import score_report

    report = score_report(ev, top=top)
    if fmt == "markdown":
        from foldcorr.report.markdown import render_markdown

        return render_markdown(report)
    if fmt == "html":
        from foldcorr.report.html import render_html, svg_figures

        figures, note = svg_figures(ev)
        return render_html(report, figures=figures, plots_note=note)
    from foldcorr.report.text import render_text

    return render_text(report)

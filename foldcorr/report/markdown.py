"""GitHub-flavoured Markdown rendering of a report."""

from __future__ import annotations

from foldcorr.report.tables import Report, Table

__all__ = ["render_markdown", "markdown_table"]


def _escape(cell: str) -> str:
    return cell.replace("|", "\\|").replace("\n", " ")


def markdown_table(table: Table) -> str:
    """One table as a Markdown table with a level-3 heading.

    Examples
    --------
    >>> from foldcorr.report.tables import Column
    >>> print(markdown_table(Table("T", (Column("a", "label"), Column("b")), (("x", 0.5),))))
    ### T
    <BLANKLINE>
    | a | b |
    |:--|--:|
    | x | 0.500 |
    """
    head = "| " + " | ".join(_escape(c.title) for c in table.columns) + " |"
    rule = "|" + "|".join("--:" if c.numeric else ":--" for c in table.columns) + "|"
    body = ["| " + " | ".join(_escape(c) for c in row) + " |" for row in table.cells()]
    lines = [f"### {table.title}", "", head, rule, *body]
    if table.note:
        lines += ["", f"_{_escape(table.note)}_"]
    return "\n".join(lines)


def render_markdown(report: Report) -> str:
    """A whole report as Markdown.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> from foldcorr.report.tables import score_report
    >>> md = render_markdown(score_report(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))))
    >>> md.splitlines()[0]
    '## foldcorr score'
    """
    lines = [f"## {report.title}", ""]
    lines += [f"- **{key}**: {_escape(value)}" for key, value in report.facts]
    for table in report.tables:
        lines += ["", markdown_table(table)]
    if report.warnings:
        lines += ["", "### Warnings", ""] + [f"- {_escape(w)}" for w in report.warnings]
    return "\n".join(lines) + "\n"

"""GitHub-flavoured Markdown rendering of a report.

Markdown output is shown on CI summary pages and pull requests, which render
HTML: every piece of text (labels, cells, facts, notes, warnings) is data, so
:func:`escape_markdown` makes it inert before it is placed in the page.
"""

from __future__ import annotations

from foldcorr.report.tables import Report, Table, legend

__all__ = ["render_markdown", "markdown_table", "escape_markdown"]

#: HTML's special characters, as entities (``&`` first).
_HTML = (("&", "&amp;"), ("<", "&lt;"), (">", "&gt;"))
#: Characters with a meaning in (GitHub-flavoured) Markdown, escaped with a backslash.
_MARKDOWN = "\\|*_`[]~$#!"


def escape_markdown(text) -> str:
    """``text`` as inert Markdown: shown as written, never as markup or HTML.

    HTML's ``<``, ``>`` and ``&`` become entities; Markdown's table, emphasis,
    code, link, strike-through, math and heading characters get a backslash
    (except an underscore inside a word, which GitHub-flavoured Markdown never
    reads as emphasis); line breaks and other control characters become spaces.

    Examples
    --------
    >>> print(escape_markdown("<img src=x onerror=alert(1)>"))
    &lt;img src=x onerror=alert(1)&gt;
    >>> print(escape_markdown("a|b *c* _d_ `e` [f](g) R_K"))
    a\\|b \\*c\\* \\_d\\_ \\`e\\` \\[f\\](g) R_K
    """
    text, out = str(text), []
    for i, ch in enumerate(text):
        if ch == "_" and 0 < i < len(text) - 1 and text[i - 1].isalnum() and text[i + 1].isalnum():
            out.append(ch)  # inside a word (R_K, class_a) an underscore is never emphasis
        elif ch in _MARKDOWN:
            out.append("\\" + ch)
        elif ch < " " or ch == "\x7f":
            out.append(" ")
        else:
            out.append(ch)
    text = "".join(out)
    for ch, entity in _HTML:
        text = text.replace(ch, entity)
    return text


_escape = escape_markdown


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
    title = table.title
    if table.brief is not None:
        title = title.split(" (top ")[0] + f" (top {len(table.brief)} of {len(body)})"
    lines = [f"### {_escape(title)}", "", head, rule,
             *(body if table.brief is None else [body[i] for i in table.brief])]
    if table.note:
        lines += ["", f"_{_escape(table.note)}_"]
    words = legend(table.columns)
    if words:
        lines += ["", f"_{_escape(words)}_"]
    if table.brief is not None and len(table.brief) < len(body):
        lines += ["", f"<details><summary>All {len(body)} rows</summary>", "", head, rule,
                  *body, "", "</details>"]
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
    lines = [f"## {_escape(report.title)}", ""]
    lines += [f"- **{_escape(key)}**: {_escape(value)}" for key, value in report.facts]
    for table in report.tables:
        lines += ["", markdown_table(table)]
    if report.warnings:
        lines += ["", "### Warnings", ""] + [f"- {_escape(w)}" for w in report.warnings]
    return "\n".join(lines) + "\n"

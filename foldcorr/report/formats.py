"""The output formats and result kinds of the report layer, listed once (imports nothing).

A new output format is one writer function in :mod:`foldcorr.report.documents`
and one line in :data:`WRITERS`; a new result kind is one function that makes
its Document and one line in :data:`DOCUMENTS`.
"""

__all__ = ["WRITERS", "FORMATS", "DOCUMENTS"]

#: Output format -> the function (``module:name``) that writes a Document in it.
WRITERS = {
    "text": "foldcorr.report.documents:write_text",
    "json": "foldcorr.report.documents:write_json",
    "markdown": "foldcorr.report.documents:write_markdown",
    "html": "foldcorr.report.documents:write_html",
}
FORMATS = tuple(WRITERS)

#: Result class name -> the function (``module:name``) that makes its Document.
DOCUMENTS = {
    "Evaluation": "foldcorr.report.score:score_document",
    "Comparison": "foldcorr.report.compare:compare_document",
    "GateResult": "foldcorr.report.gate:gate_document",
    "SweepResult": "foldcorr.report.sweep:sweep_document",
    "ManyComparison": "foldcorr.report.many:many_document",
}

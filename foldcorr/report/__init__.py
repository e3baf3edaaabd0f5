"""The report layer: a result in, text out (terminal, plain, Markdown, JSON, HTML).

:func:`render` writes any result (an evaluation, a comparison, a gate result, a
threshold sweep) in any of :data:`FORMATS`, through one
:class:`~foldcorr.report.documents.Document` per result kind (:data:`DOCUMENTS`)
and one writer per format (:data:`WRITERS`). Renderers take result objects and
never compute a metric. Importing this package loads nothing heavy, so the
command line can list the formats cheaply.
"""

from __future__ import annotations

import importlib

from foldcorr.report.formats import DOCUMENTS, FORMATS, WRITERS

__all__ = ["FORMATS", "WRITERS", "DOCUMENTS", "document", "render", "render_score"]

def _load(spec: str):
    module, name = spec.split(":")
    return getattr(importlib.import_module(module), name)


def document(result, *, top: int | None = 20, **context):
    """The :class:`~foldcorr.report.documents.Document` of a result.

    ``top`` limits the rows shown in text, Markdown and HTML (None: all); the
    JSON document always carries every row. ``context`` passes what a result
    kind needs besides (e.g. the model ``names`` of a comparison, ``source``).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> document(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]))).report.title
    'foldcorr score'
    """
    kind = type(result).__name__
    if kind not in DOCUMENTS:
        from foldcorr.errors import OptionError

        raise OptionError(f"cannot render a {kind!r}; expected one of {sorted(DOCUMENTS)!r}")
    return _load(DOCUMENTS[kind])(result, top=top, **context)


def render(result, fmt: str = "text", *, top: int | None = 20, **context) -> str:
    """Render any result in one of :data:`FORMATS` as plain text (no colour).

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> render(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])), "json")[:32]
    '{\\n  "schema": "foldcorr.score/2"'
    """
    from foldcorr.report.documents import write

    return write(document(result, top=top, **context), fmt)


def render_score(ev, fmt: str, *, top: int | None = 20) -> str:
    """Render an evaluation (the output of ``foldcorr score``); :func:`render` of ``ev``.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> render_score(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])), "markdown")[:17]
    '## foldcorr score'
    """
    return render(ev, fmt, top=top)

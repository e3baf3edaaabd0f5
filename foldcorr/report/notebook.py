"""Results in a notebook: a compact HTML fragment of the report's tables, every row.

Result kinds with a Document (:data:`foldcorr.report.formats.DOCUMENTS`) show the
tables of their report; the others (interval estimates, fold statistics, repair
analyses) show their scalar fields as facts and each one-dimensional field as
a small table. The ``_repr_html_`` hook of every result object imports
:func:`html_fragment` at call time.
"""

from __future__ import annotations

import dataclasses
import html

import numpy as np
import xarray as xr

from foldcorr.report import DOCUMENTS, document
from foldcorr.report.html import html_table
from foldcorr.report.tables import Column, Report, Table, format_value

__all__ = ["notebook_report", "html_fragment"]

_STYLE = ("<style>.foldcorr-nb .scroll{max-height:24em;overflow:auto}"
          ".foldcorr-nb td.num,.foldcorr-nb th.num{text-align:right}"
          ".foldcorr-nb h2{font-size:1.05em;margin:.6em 0 .2em}</style>")


def _column(name: str, values: np.ndarray) -> Column:
    kind = values.dtype.kind
    return Column(str(name), "metric" if kind == "f" else "count" if kind in "iu" else "label")


def _variable_table(title: str, data) -> Table | None:
    """A one-dimensional DataArray or Dataset as a table (None for any other shape)."""
    ds = data.to_dataset(name=data.name or "value") if isinstance(data, xr.DataArray) else data
    dims = list(ds.dims)
    if len(dims) != 1 or any(v.dims != (dims[0],) for v in ds.data_vars.values()):
        return None
    dim = dims[0]
    names = list(ds.data_vars)
    index = ds[dim].values if dim in ds.coords else np.arange(ds.sizes[dim])
    columns = (Column(dim, "label"), *(_column(n, ds[n].values) for n in names))
    rows = tuple(zip(index.tolist(), *(ds[n].values.tolist() for n in names)))
    return Table(title, columns, rows)


def _bootstrap_table(title: str, res) -> Table:
    ds = xr.Dataset({"estimate": res.estimate, "low": res.low, "high": res.high})
    table = _variable_table(title, ds)
    if table is not None:
        return table
    columns = tuple(Column(n) for n in ("estimate", "low", "high"))
    return Table(title, columns, ((float(res.estimate), float(res.low), float(res.high)),))


def _is_interval(value) -> bool:
    return all(hasattr(value, name) for name in ("estimate", "low", "high"))


def _fields_report(result) -> Report:
    """Scalars as facts, one-dimensional arrays and nested intervals as tables."""
    facts, tables = [], []
    if _is_interval(result):
        tables.append(_bootstrap_table("estimate and interval", result))
    for f in dataclasses.fields(result):
        value = getattr(result, f.name)
        if isinstance(value, (bool, int, float, str, np.number)):
            kind = "metric" if isinstance(value, (float, np.floating)) else "text"
            facts.append((f.name, format_value(value, kind)))
        elif isinstance(value, (xr.DataArray, xr.Dataset)):
            table = _variable_table(f.name, value)
            tables += [table] if table is not None else []
        elif _is_interval(value):
            tables.append(_bootstrap_table(f.name, value))
        elif dataclasses.is_dataclass(value):
            tables += list(_fields_report(value).tables)
    return Report(type(result).__name__, tuple(facts), tuple(tables),
                  tuple(getattr(result, "warnings", ()) or ()))


def notebook_report(result) -> Report:
    """The report a notebook shows for any result, with every row.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.analysis.uncertainty import bootstrap
    >>> res = bootstrap(confusion_tensor([[6, 2], [1, 3]], ["p", "n"]), n_resamples=200, seed=0)
    >>> notebook_report(res).tables[0].columns[0].title
    'estimate'
    """
    if type(result).__name__ in DOCUMENTS:
        return document(result, top=None).report
    return _fields_report(result)


def html_fragment(result) -> str:
    """A compact HTML fragment (no page around it) of a result's tables, every row.

    Examples
    --------
    >>> from foldcorr.tensor import confusion_tensor
    >>> from foldcorr.evaluation import evaluate
    >>> out = html_fragment(evaluate(confusion_tensor([[6, 2], [1, 3]], ["p", "n"])))
    >>> out.startswith('<div class="foldcorr-nb">'), "<table" in out
    (True, True)
    """
    report = notebook_report(result)
    facts = ", ".join(f"{html.escape(k)}: {html.escape(v)}" for k, v in report.facts)
    parts = ['<div class="foldcorr-nb">', _STYLE,
             f"<strong>{html.escape(report.title)}</strong>", f"<p>{facts}</p>"]
    parts += [html_table(t) for t in report.tables]
    if report.warnings:
        parts.append("<ul>" + "".join(f"<li>{html.escape(w)}</li>" for w in report.warnings)
                     + "</ul>")
    parts.append("</div>")
    return "\n".join(parts)

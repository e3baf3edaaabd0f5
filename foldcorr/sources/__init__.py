"""The sources layer: files, datasets and frames in, confusion tensors out.

:func:`load` is the one way in (see :mod:`foldcorr.sources.dispatch`). Names are
re-exported lazily, so that importing this package loads neither pandas,
pyarrow, dask nor rich. Nothing here computes a metric.
"""

from __future__ import annotations

from foldcorr._lazy import lazy_exports

_EXPORTS = {
    "foldcorr.sources.dispatch": ["load", "load_tensor", "tally_dataset"],
    "foldcorr.sources.tables": ["TableSpec", "read_table"],
    "foldcorr.sources.formats": ["FORMATS", "format_for"],
    "foldcorr.sources.where": ["Where", "parse_where"],
    "foldcorr.sources.stream": ["StreamResult", "stream_tensor"],
}
_WHERE, __getattr__, __dir__ = lazy_exports("foldcorr.sources", _EXPORTS, globals())

__all__ = list(_WHERE)

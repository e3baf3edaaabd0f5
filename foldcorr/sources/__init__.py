"""The sources layer: files, datasets and frames in, confusion tensors out.

:func:`load` is the one way in (see :mod:`foldcorr.sources.dispatch`). Names are
re-exported lazily, so that importing this package loads neither pandas,
pyarrow, dask nor rich. Nothing here computes a metric.
"""

from __future__ import annotations

import importlib

_EXPORTS = {
    "foldcorr.sources.dispatch": ["load", "load_tensor", "tally_dataset"],
    "foldcorr.sources.tables": ["TableSpec", "read_table"],
    "foldcorr.sources.formats": ["FORMATS", "format_for"],
    "foldcorr.sources.where": ["Where", "parse_where"],
    "foldcorr.sources.stream": ["StreamResult", "stream_tensor"],
}
_WHERE = {name: module for module, names in _EXPORTS.items() for name in names}

__all__ = list(_WHERE)


def __getattr__(name: str):
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module 'foldcorr.sources' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(__all__)

"""Start-up of the command line: import only what a run uses.

xarray asks whether each new array is a Dask or a ``sparse`` array, and answers
by importing those packages when they are installed (Dask about 1.5 s with
SciPy's sparse and FFT modules; ``sparse`` about 1 s with numba), although a
command-line run hands xarray neither unless it needs them: the Dask engine
returns NumPy partial tallies, and a sparse tensor is made only for many
classes, by importing ``sparse`` first. An object can be such an array only
once its package is imported, so :func:`defer_array_lookups` gives xarray's
checks that answer: stand-in types whose ``isinstance`` looks at the real type
only if its package is imported, and a Dask collection check that says no while
Dask is not imported. It is used by the command line only, never on import of
the library, and does nothing for a package already imported or when xarray's
checks have another shape.
"""

from __future__ import annotations

import sys

__all__ = ["defer_array_lookups", "DeferredArray"]

#: Package -> the attribute path of its array type, as xarray checks it.
DEFERRED = {"dask": ("dask.array", "Array"), "sparse": ("sparse", "SparseArray")}


class _DeferredCheck(type):
    def __instancecheck__(cls, obj) -> bool:
        module = sys.modules.get(cls.module)
        return module is not None and isinstance(obj, getattr(module, cls.name))


class DeferredArray(metaclass=_DeferredCheck):
    """Stands for a package's array type in ``isinstance`` checks without importing it."""

    module, name = "dask.array", "Array"


def _stand_in(module: str, name: str) -> type:
    return _DeferredCheck(f"Deferred{name}", (DeferredArray,), {"module": module, "name": name})


def defer_array_lookups() -> list:
    """Let xarray check for Dask and ``sparse`` arrays without importing them.

    Returns
    -------
    list of str
        The packages whose lookup was deferred.

    Examples
    --------
    >>> import numpy as np
    >>> isinstance(np.zeros(2), _stand_in("sparse", "SparseArray"))
    False
    """
    try:
        from packaging.version import Version
        from xarray.namedarray import pycompat, utils
    except ImportError:
        return []
    cache = getattr(pycompat, "_cached_duck_array_modules", None)
    module_type = getattr(pycompat, "DuckArrayModule", None)
    if not isinstance(cache, dict) or module_type is None:
        return []
    deferred = []
    for package, (module, name) in DEFERRED.items():
        if package in sys.modules or package in cache:
            continue
        if package == "dask" and not _defer_collection_check(utils):
            continue
        stand_in = object.__new__(module_type)
        stand_in.module, stand_in.version = None, Version("0")
        stand_in.type, stand_in.available = (_stand_in(module, name),), False
        cache[package] = stand_in
        deferred.append(package)
    return deferred


def _defer_collection_check(utils) -> bool:
    check = getattr(utils, "is_dask_collection", None)
    if check is None:
        return False

    def is_dask_collection(x) -> bool:
        return "dask" in sys.modules and check(x)

    utils.is_dask_collection = is_dask_collection
    return True

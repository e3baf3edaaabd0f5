"""Start-up of the command line: import only what a run uses.

xarray asks whether each new array is a Dask array, and answers that by
importing Dask when it is installed (about 1.5 s, with SciPy's sparse and FFT
modules), although a command-line run never hands xarray a Dask array: the Dask
engine returns NumPy partial tallies. An object can be a Dask array only once
Dask is imported, so :func:`defer_dask_lookup` gives xarray's two checks that
answer: a stand-in type whose ``isinstance`` looks at ``dask.array`` only if it
is imported, and a collection check that says no while Dask is not imported.
It is used by the command line only, never on import of the library, and does
nothing when Dask is already imported or xarray's checks have another shape.
"""

from __future__ import annotations

import sys

__all__ = ["defer_dask_lookup"]


class _DaskArrayCheck(type):
    def __instancecheck__(cls, obj) -> bool:
        module = sys.modules.get("dask.array")
        return module is not None and isinstance(obj, module.Array)


class DeferredDaskArray(metaclass=_DaskArrayCheck):
    """Stands for ``dask.array.Array`` in ``isinstance`` checks without importing Dask."""


def defer_dask_lookup() -> bool:
    """Let xarray check for Dask arrays without importing Dask; True when it took effect.

    Examples
    --------
    >>> import numpy as np
    >>> isinstance(np.zeros(2), DeferredDaskArray)
    False
    """
    if "dask" in sys.modules:
        return False
    try:
        from packaging.version import Version
        from xarray.namedarray import pycompat
    except ImportError:
        return False
    from xarray.namedarray import utils

    cache = getattr(pycompat, "_cached_duck_array_modules", None)
    module_type = getattr(pycompat, "DuckArrayModule", None)
    check = getattr(utils, "is_dask_collection", None)
    if not isinstance(cache, dict) or module_type is None or "dask" in cache or check is None:
        return False
    stand_in = object.__new__(module_type)
    stand_in.module, stand_in.version = None, Version("0")
    stand_in.type, stand_in.available = (DeferredDaskArray,), False
    cache["dask"] = stand_in

    def is_dask_collection(x) -> bool:
        return "dask" in sys.modules and check(x)

    utils.is_dask_collection = is_dask_collection
    return True

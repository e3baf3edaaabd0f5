"""Lazy re-exports for packages whose public names live in heavier modules."""

from __future__ import annotations

import importlib
from collections.abc import Mapping

__all__ = ["lazy_exports"]


def lazy_exports(package: str, exports: Mapping[str, list], namespace: dict):
    """Module-level ``__getattr__`` and ``__dir__`` importing each name on first use.

    Parameters
    ----------
    package : str
        The package's name, for the error message.
    exports : mapping
        Module name -> the public names it provides.
    namespace : dict
        The package's ``globals()``; each name is cached there once imported.

    Returns
    -------
    where : dict
        Name -> module.
    getattr_, dir_ : callable
        To bind as the package's ``__getattr__`` and ``__dir__``.

    Examples
    --------
    >>> ns = {}
    >>> where, get, _ = lazy_exports("pkg", {"math": ["pi"]}, ns)
    >>> round(get("pi"), 2), "pi" in ns
    (3.14, True)
    """
    where = {name: module for module, names in exports.items() for name in names}

    def getattr_(name: str):
        module = where.get(name)
        if module is None:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        value = getattr(importlib.import_module(module), name)
        namespace[name] = value
        return value

    def dir_():
        return sorted(namespace.get("__all__", where))

    return where, getattr_, dir_

"""Skip the docstring examples of optional extras that are not installed."""

import importlib.util

import pytest

#: Module file -> the package its examples need.
_NEEDS = {"plots.py": "matplotlib"}


def pytest_collection_modifyitems(config, items):
    for item in items:
        need = _NEEDS.get(item.path.name)
        if need and type(item).__name__ == "DoctestItem" and importlib.util.find_spec(need) is None:
            item.add_marker(pytest.mark.skip(reason=f"needs {need} (the 'plot' extra)"))

"""Skip the docstring examples of optional extras that are not installed."""

import importlib.util

import pytest

#: Folder of the package -> the package its modules' examples need.
_NEEDS = {"plots": "matplotlib"}
#: Methods whose examples draw (``result.plot``), wherever they live.
_DRAWING = (".plot",)


def pytest_collection_modifyitems(config, items):
    for item in items:
        need = _NEEDS.get(item.path.parent.name)
        if item.name.endswith(_DRAWING):
            need = "matplotlib"
        if need and type(item).__name__ == "DoctestItem" and importlib.util.find_spec(need) is None:
            item.add_marker(pytest.mark.skip(reason=f"needs {need} (the 'plot' extra)"))

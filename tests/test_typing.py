"""Type hints on the public API: every exported function is annotated, and mypy checks them.

mypy runs with the configuration in ``pyproject.toml`` on ``foldcorr/__init__.py`` and on
``tests/typed_api.py``, which states the type of each call as a user of the package sees
it (``assert_type``, so a hint that degrades to ``Any`` fails too).
"""

import ast
import inspect
import subprocess
import sys
from importlib import resources
from pathlib import Path

import pytest

import foldcorr

ROOT = Path(__file__).resolve().parents[1]

#: Exported functions still without complete hints. Remove a name once it has them: the
#: ratchet test below fails while a typed name stays listed.
NOT_YET_TYPED: set[str] = set()


def _public_functions():
    return {name: obj for name in foldcorr.__all__
            if inspect.isfunction(obj := getattr(foldcorr, name))}


def _missing_hints(function) -> list[str]:
    sig = inspect.signature(function)
    missing = [p.name for p in sig.parameters.values() if p.annotation is inspect.Parameter.empty]
    return missing + (["return"] if sig.return_annotation is inspect.Signature.empty else [])


def test_every_public_function_has_hints():
    untyped = {name: _missing_hints(f) for name, f in _public_functions().items()
               if name not in NOT_YET_TYPED and _missing_hints(f)}
    assert untyped == {}


def test_names_waiting_for_hints_are_still_untyped():
    functions = _public_functions()
    assert NOT_YET_TYPED <= set(functions)
    assert [name for name in NOT_YET_TYPED if not _missing_hints(functions[name])] == []


def test_type_checkers_see_every_export():
    # the lazy exports are also imported under TYPE_CHECKING, so that a type checker sees them
    tree = ast.parse((ROOT / "foldcorr" / "__init__.py").read_text())
    block = next(node for node in tree.body if isinstance(node, ast.If)
                 and getattr(node.test, "id", None) == "TYPE_CHECKING")
    seen = {node.module: [a.name for a in node.names] for node in block.body
            if isinstance(node, ast.ImportFrom)}
    assert seen == foldcorr._EXPORTS


def test_py_typed_marker_ships_with_the_package():
    assert resources.files("foldcorr").joinpath("py.typed").is_file()
    assert 'foldcorr = ["py.typed"]' in (ROOT / "pyproject.toml").read_text()


@pytest.fixture(scope="module")
def mypy(tmp_path_factory):
    pytest.importorskip("mypy")
    cache = tmp_path_factory.mktemp("mypy-cache")

    def run(*args: str) -> subprocess.CompletedProcess:
        return subprocess.run([sys.executable, "-m", "mypy", "--config-file", "pyproject.toml",
                               "--cache-dir", str(cache), "--no-color-output", *args],
                              cwd=ROOT, capture_output=True, text=True, timeout=600)

    return run


def test_mypy_passes_on_the_public_api(mypy):
    out = mypy()
    assert out.returncode == 0, out.stdout + out.stderr
    assert out.stdout.startswith("Success")


def test_mypy_reports_misuse_of_the_public_api(mypy, tmp_path):
    # the hints reach a user's code: wrong arguments and wrong expectations are errors
    user = tmp_path / "misuse.py"
    user.write_text(
        "from typing_extensions import assert_type\n"
        "import foldcorr as fc\n"
        "t = fc.tally(['a'], ['a'])\n"
        "fc.evaluate('not a tensor')\n"
        "fc.bootstrap(t, seed='seven')\n"
        "assert_type(fc.rk(t), float)\n")
    out = mypy(str(user))
    assert out.returncode == 1
    assert 'misuse.py:4: error: Argument 1 to "evaluate" has incompatible type "str"' in out.stdout
    assert 'misuse.py:5: error: Argument "seed" to "bootstrap" has incompatible type' in out.stdout
    assert 'misuse.py:6: error: Expression is of type "DataArray", not "float"' in out.stdout

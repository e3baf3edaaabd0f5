"""The house: layers import one way, no import cycle, short modules, no private names shared.

The rules are those of DESIGN.md: each folder (or top-level module) of the package is a layer;
a module imports only modules of its own layer or of the layers before it in :data:`ORDER`, at any
depth (call-time imports included); what two modules share is a public name of the lower one.
The one exception is a result object's display hook (``__rich__``, ``_repr_html_``, ``plot``, ...),
which may import its renderer from the report layer at call time.
"""

import ast
import pathlib
import subprocess
import sys

import pytest

import foldcorr

PACKAGE = pathlib.Path(foldcorr.__file__).parent
ORDER = ["errors", "tensor", "metrics", "analysis", "evaluation", "gate", "sources", "pipeline",
         "report", "cli"]
#: Top-level modules that are not a layer of their own name.
LAYER_OF_MODULE = {"_files": "errors", "_version": "errors", "_lazy": "errors", "testing": "tensor",
                   "figures": "metrics", "decomposition": "metrics",
                   "__main__": "cli", "__init__": "cli"}
#: Methods of result objects that may import their renderer at call time.
DISPLAY_HOOKS = {"__rich__", "_repr_html_", "to_json", "to_html", "to_markdown", "plot"}
MAX_LINES = 600


def layer_of(module: str) -> str:
    head = module.split(".")[0]
    layer = LAYER_OF_MODULE.get(head, head)
    assert layer in ORDER, f"foldcorr.{module} belongs to no layer of {ORDER}"
    return layer


def modules():
    """(dotted name relative to foldcorr, path) of every module of the package."""
    for path in sorted(PACKAGE.rglob("*.py")):
        rel = path.relative_to(PACKAGE).with_suffix("")
        parts = rel.parts[:-1] if rel.name == "__init__" and len(rel.parts) > 1 else rel.parts
        yield ".".join(parts), path


def _package_of(module: str, path: pathlib.Path) -> tuple:
    parts = tuple(module.split("."))
    return parts if path.name == "__init__.py" and module != "__init__" else parts[:-1]


def _is_module(parts) -> bool:
    return (PACKAGE.joinpath(*parts).with_suffix(".py").exists()
            or PACKAGE.joinpath(*parts).is_dir())


def _foldcorr_imports(tree: ast.AST, package: tuple):
    """Yield (imported module relative to foldcorr, names taken, line, enclosing functions).

    Every form counts: ``import foldcorr.x``, ``from foldcorr.x import y``,
    ``from foldcorr import x`` (a submodule, or a name the package re-exports
    from its module) and relative imports, at any depth.
    """

    def resolve_from(node: ast.ImportFrom):
        if node.level:
            base = list(package[: len(package) - (node.level - 1)])
            parts = base + (node.module.split(".") if node.module else [])
        elif node.module == "foldcorr" or (node.module or "").startswith("foldcorr."):
            parts = node.module.split(".")[1:]
        else:
            return
        names = [alias.name for alias in node.names
                 if not _is_module([*parts, alias.name])]
        if parts and node.module is not None and names:
            yield ".".join(parts), names
        for alias in node.names:  # `from foldcorr import x` / `from . import x`
            name = ".".join([*parts, alias.name])
            if _is_module(name.split(".")):
                yield name, []
            elif not parts and alias.name in foldcorr._WHERE:
                yield foldcorr._WHERE[alias.name].removeprefix("foldcorr."), [alias.name]
            elif not parts:
                yield "__init__", [alias.name]

    def visit(node, functions):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            functions = (*functions, node.name)
        if isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name == "foldcorr":
                    yield "__init__", [], node.lineno, functions
                elif alias.name.startswith("foldcorr."):
                    yield alias.name.removeprefix("foldcorr."), [], node.lineno, functions
        elif isinstance(node, ast.ImportFrom):
            for module, names in resolve_from(node):
                yield module, names, node.lineno, functions
        for child in ast.iter_child_nodes(node):
            yield from visit(child, functions)

    yield from visit(tree, ())


def _module_aliases(tree: ast.AST) -> set:
    """Names bound to foldcorr modules (``from foldcorr import metrics as m``)."""
    aliases = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and (node.module or "").startswith("foldcorr"):
            for alias in node.names:
                if _is_module([*node.module.split(".")[1:], alias.name]):
                    aliases.add(alias.asname or alias.name)
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.startswith("foldcorr.") and alias.asname:
                    aliases.add(alias.asname)
    return aliases


def _graph():
    """Module -> {imported module: first line}, display hooks left out."""
    known = {name for name, _ in modules()}
    graph = {}
    for name, path in modules():
        tree = ast.parse(path.read_text())
        edges = {}
        for module, _, line, functions in _foldcorr_imports(tree, _package_of(name, path)):
            if DISPLAY_HOOKS.intersection(functions) or module == name:
                continue
            while module not in known and "." in module:  # a name re-exported by a package
                module = module.rsplit(".", 1)[0]
            if module in known:
                edges.setdefault(module, line)
        graph[name] = edges
    return graph


def test_import_walker_sees_every_form():
    # The checker itself: each import form below must be found (a checker that finds
    # nothing could never fail).
    code = """
import foldcorr.report.text
from foldcorr import cli
from foldcorr import evaluate
from foldcorr.sources import load
from . import tables
from .html import x
def f():
    from foldcorr import metrics as m
class C:
    def __rich__(self):
        from foldcorr.report.text import render_rich
"""
    found = [(mod, fns) for mod, _, _, fns in _foldcorr_imports(ast.parse(code), ("report",))]
    assert found == [("report.text", ()), ("cli", ()), ("evaluation", ()), ("sources", ()),
                     ("report.tables", ()), ("report.html", ()), ("metrics", ("f",)),
                     ("report.text", ("__rich__",))]


def test_core_imports_no_renderer_or_extra():
    code = ("import sys, foldcorr.metrics, foldcorr.evaluation, foldcorr.analysis.uncertainty; "
            "print(','.join(m for m in ('rich', 'matplotlib', 'dask') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def test_imports_go_one_way():
    # Each module may import only modules of its own layer or of layers above it (DESIGN.md),
    # at any depth. Imports inside a result object's display hook are the one documented
    # exception (rendering lives in the report layer).
    bad = []
    for name, edges in _graph().items():
        mine = layer_of(name)
        for module, line in edges.items():
            target = layer_of(module)
            if ORDER.index(target) > ORDER.index(mine):
                bad.append(f"{name}:{line} ({mine}) imports foldcorr.{module} ({target})")
    assert bad == []


def _cycles(graph: dict) -> list:
    """Strongly connected components with more than one module (Tarjan, iterative)."""
    index, low, on_stack, stack, found, counter = {}, {}, set(), [], [], [0]
    for root in graph:
        if root in index:
            continue
        work = [(root, iter(graph[root]))]
        index[root] = low[root] = counter[0]
        counter[0] += 1
        stack.append(root)
        on_stack.add(root)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is None:
                work.pop()
                if work:
                    low[work[-1][0]] = min(low[work[-1][0]], low[node])
                if low[node] == index[node]:
                    component = []
                    while True:
                        member = stack.pop()
                        on_stack.discard(member)
                        component.append(member)
                        if member == node:
                            break
                    if len(component) > 1:
                        found.append(sorted(component))
            elif child not in index:
                index[child] = low[child] = counter[0]
                counter[0] += 1
                stack.append(child)
                on_stack.add(child)
                work.append((child, iter(graph.get(child, ()))))
            elif child in on_stack:
                low[node] = min(low[node], index[child])
    return found


def test_cycle_finder_finds_a_cycle():
    assert _cycles({"a": {"b": 1}, "b": {"c": 1}, "c": {"a": 1}, "d": {"a": 1}}) == [["a", "b", "c"]]


def test_no_import_cycle():
    # Call-time imports count: a cycle through a function-level import is still a cycle.
    assert _cycles(_graph()) == []


def test_no_module_over_the_limit():
    long = [f"{name} ({path.read_text().count(chr(10))} lines)" for name, path in modules()
            if path.read_text().count("\n") > MAX_LINES]
    assert long == []


def test_no_private_name_crosses_modules():
    # What two modules share is a public name of the lower one (DESIGN.md).
    bad = []
    for name, path in modules():
        tree = ast.parse(path.read_text())
        for module, names, line, _ in _foldcorr_imports(tree, _package_of(name, path)):
            private = [n for n in names if n.startswith("_") and not n.startswith("__")]
            if private and module != name:
                bad.append(f"{name}:{line} takes {private} from foldcorr.{module}")
        aliases = _module_aliases(tree)
        for node in ast.walk(tree):
            if (isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name)
                    and node.value.id in aliases and node.attr.startswith("_")
                    and not node.attr.startswith("__")):
                bad.append(f"{name}:{node.lineno} uses {node.value.id}.{node.attr}")
    assert bad == []


@pytest.mark.parametrize("code, expected", [
    ("from foldcorr.metrics import _secret", "takes ['_secret']"),
    ("from foldcorr import metrics as m\nm._secret(1)", "uses m._secret"),
])
def test_private_name_checker_sees_both_forms(tmp_path, code, expected):
    tree = ast.parse(code)
    names = [n for _, ns, _, _ in _foldcorr_imports(tree, ()) for n in ns]
    aliases = _module_aliases(tree)
    uses = [f"uses {n.value.id}.{n.attr}" for n in ast.walk(tree)
            if isinstance(n, ast.Attribute) and isinstance(n.value, ast.Name)
            and n.value.id in aliases]
    assert expected in f"takes {names}" or expected in uses

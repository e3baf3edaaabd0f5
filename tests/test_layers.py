"""Layering: the core never imports the renderers or optional extras."""

import ast
import pathlib
import subprocess
import sys

import foldcorr

PACKAGE = pathlib.Path(foldcorr.__file__).parent
ORDER = ["errors", "tensor", "metrics", "analysis", "evaluation", "sources", "report", "cli"]
LAYER = {"errors": "errors", "_files": "errors", "_version": "errors", "tensor": "tensor",
         "testing": "tensor", "metrics": "metrics", "evaluation": "evaluation",
         "sources": "sources", "demo": "sources", "paired": "sources", "streaming": "sources",
         "distributed": "sources", "saved": "sources", "floors": "sources", "report": "report",
         "cli": "cli", "__main__": "cli", "__init__": "cli", "samples": "tensor",
         "gate": "evaluation"}


def layer_of(module: str) -> str:
    head = module.split(".")[0]
    return LAYER.get(head, "sources" if head.startswith("sources") else "analysis")


def test_core_imports_no_renderer_or_extra():
    code = ("import sys, foldcorr.metrics, foldcorr.evaluation; "
            "print(','.join(m for m in ('rich', 'matplotlib', 'dask') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def _foldcorr_imports(tree: ast.AST, package: tuple):
    """Yield (imported module relative to foldcorr, line, enclosing function names).

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
        if parts and node.module is not None:
            yield ".".join(parts)
        for alias in node.names:  # `from foldcorr import x` / `from . import x`
            name = ".".join([*parts, alias.name])
            if (PACKAGE.joinpath(*name.split(".")).with_suffix(".py").exists()
                    or PACKAGE.joinpath(*name.split(".")).is_dir()):
                yield name
            elif not parts and alias.name in foldcorr._WHERE:
                yield foldcorr._WHERE[alias.name].removeprefix("foldcorr.")
            elif not parts:
                yield "__init__"

    def visit(node, functions):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            functions = (*functions, node.name)
        if isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name == "foldcorr":
                    yield "__init__", node.lineno, functions
                elif alias.name.startswith("foldcorr."):
                    yield alias.name.removeprefix("foldcorr."), node.lineno, functions
        elif isinstance(node, ast.ImportFrom):
            for module in resolve_from(node):
                yield module, node.lineno, functions
        for child in ast.iter_child_nodes(node):
            yield from visit(child, functions)

    yield from visit(tree, ())


def test_import_walker_sees_every_form():
    # The checker itself: each import form below must be found (a checker that finds
    # nothing could never fail).
    code = """
import foldcorr.report.text
from foldcorr import cli
from foldcorr import evaluate
from foldcorr.sources import load_tensor
from . import tables
from .html import x
def f():
    from foldcorr import metrics as m
class C:
    def __rich__(self):
        from foldcorr.report.text import render_rich
"""
    found = [(mod, fns) for mod, _, fns in _foldcorr_imports(ast.parse(code), ("report",))]
    assert found == [("report.text", ()), ("cli", ()), ("evaluation", ()), ("sources", ()),
                     ("report.tables", ()), ("report.html", ()), ("metrics", ("f",)),
                     ("report.text", ("__rich__",))]


def test_imports_go_one_way():
    # Each module may import only modules of its own layer or of layers above it (DESIGN.md),
    # at any depth. Imports inside a result object's __rich__ method are the one documented
    # exception (rendering lives in the report layer).
    bad = []
    for path in PACKAGE.rglob("*.py"):
        rel = path.relative_to(PACKAGE).with_suffix("")
        mine = layer_of(".".join(rel.parts))
        tree = ast.parse(path.read_text())
        for module, line, functions in _foldcorr_imports(tree, rel.parts[:-1]):
            target = layer_of(module)
            if ORDER.index(target) > ORDER.index(mine) and "__rich__" not in functions:
                bad.append(f"{rel}:{line} ({mine}) imports foldcorr.{module} ({target})")
    assert bad == []

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


def test_imports_go_one_way():
    # Each module may import only modules of its own layer or of layers above it (DESIGN.md).
    # Imports inside functions of the result objects' __rich__ methods are exempt by design.
    bad = []
    for path in PACKAGE.rglob("*.py"):
        rel = path.relative_to(PACKAGE).with_suffix("")
        mine = layer_of(".".join(rel.parts))
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("foldcorr."):
                target = layer_of(node.module.removeprefix("foldcorr."))
                if ORDER.index(target) > ORDER.index(mine) and node.col_offset == 0:
                    bad.append(f"{rel} ({mine}) imports {node.module} ({target})")
    assert bad == []

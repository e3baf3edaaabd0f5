"""`foldcorr --help` starts without the heavy libraries (they load inside the verbs)."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

HEAVY = ("pandas", "xarray", "pyarrow", "dask", "distributed", "matplotlib")

PROBE = """
import contextlib, io, json, sys
from foldcorr.cli import main
with contextlib.redirect_stdout(io.StringIO()) as out:
    code = main({argv!r})
heavy = sorted({{m.split('.')[0] for m in sys.modules}} & set({heavy!r}))
print(json.dumps({{"code": code, "heavy": heavy, "help": out.getvalue()}}))
"""


@pytest.mark.parametrize("argv", [["--help"], ["score", "--help"], ["demo", "--help"]])
def test_help_imports_no_heavy_library(argv):
    run = subprocess.run([sys.executable, "-c", PROBE.format(argv=argv, heavy=HEAVY)],
                         capture_output=True, text=True, check=True)
    doc = json.loads(run.stdout)
    assert doc["code"] == 0
    assert doc["heavy"] == []
    assert "usage: foldcorr" in doc["help"]
    if argv[0] == "score":
        for flag in ("--where", "--engine", "--scheduler", "--quiet", "--skip-bad-files"):
            assert flag in doc["help"]

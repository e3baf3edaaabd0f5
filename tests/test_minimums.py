"""`.ci/minimums.py`: exact pins of the declared minimum versions, for the CI's second step.

The reference parser is `packaging.requirements.Requirement` (the parser pip itself uses): every
requirement of pyproject.toml must have one `>=` bound, and the script pins it there.
"""

import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

requirements = pytest.importorskip("packaging.requirements")

ROOT = Path(__file__).resolve().parent.parent
SCRIPT = ROOT / ".ci" / "minimums.py"


def _pins(*extras):
    run = subprocess.run([sys.executable, str(SCRIPT), *extras], capture_output=True, text=True)
    return run.returncode, run.stdout.split(), run.stderr


def test_every_declared_requirement_is_pinned_at_its_floor():
    project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    code, pins, _ = _pins("test")
    floors = {}
    for text in project["dependencies"] + project["optional-dependencies"]["test"]:
        req = requirements.Requirement(text)
        (spec,) = req.specifier  # exactly one bound each
        assert spec.operator == ">="
        floors[requirements.Requirement(text).name.lower()] = spec.version
    pinned = {}
    for pin in pins:
        req = requirements.Requirement(pin)
        (spec,) = req.specifier
        assert spec.operator == "=="
        pinned[req.name.lower()] = spec.version
    assert code == 0 and pinned == floors


def test_an_unknown_extra_is_one_line_and_exit_2():
    code, pins, err = _pins("nosuchextra")
    assert code == 2 and pins == [] and err.count("\n") == 1 and "unknown extra" in err

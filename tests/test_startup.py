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


SCORE_PROBE = """
import contextlib, io, json, sys
from foldcorr.cli import main
with contextlib.redirect_stdout(io.StringIO()):
    code = main({argv!r})
loaded = sorted({{m.split('.')[0] for m in sys.modules}} & set({unused!r}))
import dask.array as da, numpy as np, sparse, xarray as xr
wrapped = xr.DataArray(da.zeros(4, chunks=2))
held = xr.DataArray(sparse.COO.from_numpy(np.eye(3, dtype=int)))
total = held.sum().data  # a 0-d COO, or a NumPy array with older NumPy and sparse
print(json.dumps({{"code": code, "loaded": loaded, "dask_kept": type(wrapped.data).__name__,
                   "total": float(wrapped.sum().compute()), "sparse_kept": type(held.data).__name__,
                   "sparse_total": int(total.todense() if hasattr(total, "todense") else total)}}))
"""
UNUSED = ("dask", "distributed", "matplotlib", "h5py", "h5netcdf", "sklearn", "scipy", "sparse")


@pytest.mark.parametrize("fmt", ["text", "json", "markdown"])
def test_scoring_a_small_file_imports_only_what_it_uses(fmt):
    # A run that uses no Dask, sparse arrays, plots, NetCDF or scikit-learn must not import
    # them; xarray still recognises Dask and sparse arrays made afterwards (the deferred
    # checks are exact).
    fixture = str(__import__("pathlib").Path(__file__).parent.parent / "fixtures"
                  / "plankton_small.csv")
    probe = SCORE_PROBE.format(argv=["score", fixture, "--format", fmt], unused=UNUSED)
    run = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True,
                         check=True)
    doc = json.loads(run.stdout.splitlines()[-1])
    assert doc == {"code": 0, "loaded": [], "dask_kept": "Array", "total": 0.0,
                   "sparse_kept": "COO", "sparse_total": 3}

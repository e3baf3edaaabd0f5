"""Smoke test: the bootstrap benchmark runs in quick mode and reports its figures."""

from __future__ import annotations

import importlib.util
from pathlib import Path


def test_bench_bootstrap_quick(capsys):
    path = Path(__file__).parent / "bench" / "bench_bootstrap.py"
    spec = importlib.util.spec_from_file_location("bench_bootstrap", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    figures = module.run(quick=True)
    out = capsys.readouterr().out
    assert "extrapolated from" in out and "ratio" in out
    for key in ("bootstrap", "stratified", "compare"):
        assert figures[key]["ours_s"] > 0 and figures[key]["reference_s"] > 0
    low, high = figures["bootstrap"]["interval"]
    assert low < high

"""The sweep benchmark runs in quick mode and checks its own results against the references."""

import importlib.util
import json
import pathlib


def test_bench_sweep_quick(capsys):
    path = pathlib.Path(__file__).parent / "bench" / "bench_sweep.py"
    spec = importlib.util.spec_from_file_location("bench_sweep", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    figures = module.run(quick=True)  # asserts equality with the naive loop, sklearn
    json.dumps(figures)
    out = capsys.readouterr().out
    assert "ours" in out and "reference" in out and "ratio" in out
    assert figures["n_thresholds"] > 1000

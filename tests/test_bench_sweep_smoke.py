"""The sweep benchmark runs in quick mode and checks its own results against the references."""

import json


def test_bench_sweep_quick(capsys, load_bench):
    module = load_bench("sweep")
    figures = module.run(quick=True)  # asserts equality with the naive loop, sklearn
    json.dumps(figures)
    out = capsys.readouterr().out
    assert "ours" in out and "reference" in out and "ratio" in out
    assert figures["n_thresholds"] > 1000

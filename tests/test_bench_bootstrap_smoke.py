"""Smoke test: the bootstrap benchmark runs in quick mode and reports its figures."""

from __future__ import annotations



def test_bench_bootstrap_quick(capsys, load_bench):
    module = load_bench("bootstrap")
    figures = module.run(quick=True)
    out = capsys.readouterr().out
    assert "extrapolated from" in out and "ratio" in out
    for key in ("bootstrap", "stratified", "compare"):
        assert figures[key]["ours_s"] > 0 and figures[key]["reference_s"] > 0
    low, high = figures["bootstrap"]["interval"]
    assert low < high

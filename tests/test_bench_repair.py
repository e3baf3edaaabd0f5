"""Smoke test of the repair benchmark: it runs in quick mode and its checks hold."""

import json


def test_bench_repair_quick(capsys, load_bench):
    bench = load_bench("repair")
    result = bench.run(quick=True)
    json.dumps(result)
    out = capsys.readouterr().out
    assert "pair gains" in out and "ratio" in out
    for name in ("pair_gains", "class_gains", "leave_class_out"):
        # the O(K^2) update equals the from-scratch recompute on every sampled repair
        assert result[name]["max_abs_diff"] < 1e-12
        assert result[name]["ours_s"] > 0 and result[name]["reference_s"] > 0

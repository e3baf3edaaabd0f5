"""The benchmark runner finds and runs this project's streaming benchmarks (quick sizes).

Timings are printed, never asserted; this checks that the suite runs and that
its JSON holds the figures and the machine description.
"""

from __future__ import annotations

import importlib.util
import json
from pathlib import Path

import pytest

RUNNER = Path(__file__).parent / "bench" / "run.py"


def _runner():
    spec = importlib.util.spec_from_file_location("foldcorr_bench_runner", RUNNER)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_discovery_finds_every_bench_module():
    runner = _runner()
    found = runner.discover()
    on_disk = {p.stem.removeprefix("bench_") for p in RUNNER.parent.glob("bench_*.py")}
    assert set(found) == on_disk and {"stream", "dask", "startup"} <= on_disk
    with pytest.raises(SystemExit, match="no benchmark named"):
        runner.discover(["no_such_topic"])


def test_quick_suite_on_the_streaming_benchmarks(tmp_path, capsys):
    pytest.importorskip("distributed")
    runner = _runner()
    out = tmp_path / "bench.json"
    code = runner.main(["--quick", "--only", "stream", "--only", "bench_dask",
                        "--only", "startup", "--json", str(out)])
    assert code == 0
    doc = json.loads(out.read_text())
    assert doc["schema"] == "foldcorr.bench/1" and doc["quick"] is True and doc["errors"] == {}
    assert set(doc["results"]) == {"stream", "dask", "startup"}
    machine = doc["machine"]
    assert machine["cores"] >= 1 and machine["memory_bytes"] > 0
    assert machine["libraries"]["pyarrow"] and machine["libraries"]["numpy"]
    stream = doc["results"]["stream"]
    assert stream["rows"] == 400_000 and stream["peak_rss_mb_large"] > 0
    printed = capsys.readouterr().out
    assert "ratio" in printed and "peak RSS" in printed

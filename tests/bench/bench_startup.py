"""Start-up time of `foldcorr --help` and `foldcorr score --help` against `python -c pass`.

Each command runs in a fresh interpreter; the figure is the median of several
runs. The help screens import no pandas, xarray, pyarrow, dask or matplotlib
(tests/test_startup.py checks that), so most of the time is Python itself.
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import time


def _median_seconds(args, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        subprocess.run(args, check=True, stdout=subprocess.DEVNULL)
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def run(quick: bool = False) -> dict:
    repeat = 3 if quick else 15
    base = _median_seconds([sys.executable, "-c", "pass"], repeat)
    figures = {"python_c_pass_seconds": base, "repeat": repeat}
    for name, argv in (("help", ["--help"]), ("score_help", ["score", "--help"])):
        seconds = _median_seconds([sys.executable, "-m", "foldcorr", *argv], repeat)
        figures[f"{name}_seconds"] = seconds
        figures[f"{name}_over_python"] = seconds / base
        print(f"start-up 'foldcorr {' '.join(argv)}': ours {seconds:.3f} s, reference "
              f"(python -c pass) {base:.3f} s, ratio {seconds / base:.1f}x")
    return figures


if __name__ == "__main__":
    run()

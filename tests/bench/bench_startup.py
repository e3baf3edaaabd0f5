"""Start-up time of `foldcorr --help` and `foldcorr score --help` against `python -c pass`,
and of scoring a small file against importing the libraries any run needs.

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
    _small_file(figures, repeat)
    return figures


def _small_file(figures: dict, repeat: int) -> None:
    """`foldcorr score` of a 1,500-row CSV against `import pandas, pyarrow, xarray, rich`."""
    import pathlib

    small = pathlib.Path(__file__).resolve().parents[2] / "fixtures" / "plankton_small.csv"
    floor = _median_seconds([sys.executable, "-c", "import pandas, pyarrow, xarray, rich"], repeat)
    ours = _median_seconds([sys.executable, "-m", "foldcorr", "score", str(small)], repeat)
    figures.update(import_floor_seconds=floor, score_small_seconds=ours,
                   score_small_over_imports=ours / floor)
    print(f"'foldcorr score' of a 1,500-row CSV: ours {ours:.3f} s, reference (import pandas, "
          f"pyarrow, xarray, rich) {floor:.3f} s, ratio {ours / floor:.2f}x (target <= 1.6x)")


if __name__ == "__main__":
    run()

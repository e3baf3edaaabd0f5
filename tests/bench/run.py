"""Run every benchmark in this folder, print its figures, write them all as JSON.

Usage::

    python tests/bench/run.py                 # every tests/bench/bench_*.py
    python tests/bench/run.py --quick         # small sizes, seconds
    python tests/bench/run.py --only stream --only dask --json out.json

Each ``bench_<topic>.py`` exposes ``run(quick: bool = False) -> dict``, prints
lines like ``<what>: ours 0.012 s, reference 1.93 s, ratio 160x`` (the
reference measured in the same run) and returns its figures. The JSON file
(default ``bench-results.json`` in the current folder) holds every module's
figures and the machine: cores, memory, Python and library versions.
"""

from __future__ import annotations

import argparse
import importlib.util
import json
import os
import platform
import sys
import time
import traceback
from pathlib import Path

HERE = Path(__file__).resolve().parent
LIBRARIES = ("foldcorr", "numpy", "pandas", "xarray", "pyarrow", "scikit-learn", "scipy", "rich",
             "dask", "distributed")


def discover(only=None) -> dict:
    """Benchmark modules by topic name (``bench_stream.py`` -> ``"stream"``), sorted."""
    wanted = None if not only else {o.removeprefix("bench_").removesuffix(".py") for o in only}
    found = {}
    for path in sorted(HERE.glob("bench_*.py")):
        name = path.stem.removeprefix("bench_")
        if wanted is None or name in wanted:
            found[name] = path
    if wanted is not None and wanted - set(found):
        known = ", ".join(p.stem.removeprefix("bench_") for p in sorted(HERE.glob("bench_*.py")))
        raise SystemExit(f"run.py: no benchmark named {sorted(wanted - set(found))!r}; "
                         f"known: {known}")
    return found


def load(path: Path):
    """Import one benchmark module from its file."""
    if str(HERE) not in sys.path:
        sys.path.insert(0, str(HERE))
    spec = importlib.util.spec_from_file_location(f"foldcorr_bench_{path.stem}", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def machine() -> dict:
    """Cores, memory, platform and library versions of this machine."""
    from importlib import metadata

    versions = {}
    for lib in LIBRARIES:
        try:
            versions[lib] = metadata.version(lib)
        except metadata.PackageNotFoundError:
            versions[lib] = None
    memory = None
    try:
        memory = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):
        pass
    return {
        "cores": os.cpu_count(),
        "cores_usable": len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else None,
        "memory_bytes": memory,
        "memory_gib": None if memory is None else round(memory / 2**30, 1),
        "platform": platform.platform(),
        "processor": platform.processor() or platform.machine(),
        "python": platform.python_version(),
        "libraries": versions,
    }


def run_suite(*, quick: bool = False, only=None, json_path="bench-results.json") -> dict:
    """Run the selected benchmarks; write and return the document."""
    doc = {"schema": "foldcorr.bench/1", "quick": quick, "machine": machine(),
           "started": time.strftime("%Y-%m-%dT%H:%M:%S%z"), "results": {}, "errors": {}}
    for name, path in discover(only).items():
        print(f"== {name} ==", flush=True)
        start = time.perf_counter()
        try:
            figures = load(path).run(quick=quick)
        except Exception as exc:  # one broken benchmark must not hide the others
            traceback.print_exc()
            doc["errors"][name] = f"{type(exc).__name__}: {exc}"
            continue
        doc["results"][name] = figures
        print(f"({name}: {time.perf_counter() - start:.1f} s)", flush=True)
    if json_path:
        sys.path.insert(0, str(HERE.parents[1]))
        from foldcorr._files import write_text

        write_text(json_path, json.dumps(doc, indent=2, default=str) + "\n")
        print(f"figures written to {json_path}")
    return doc


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(prog="run.py", description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="small sizes (seconds)")
    parser.add_argument("--only", action="append", metavar="NAME",
                        help="run only this benchmark (repeatable), e.g. stream")
    parser.add_argument("--json", default="bench-results.json", metavar="FILE",
                        help="where to write the figures (default: bench-results.json)")
    args = parser.parse_args(argv)
    doc = run_suite(quick=args.quick, only=args.only, json_path=args.json)
    return 1 if doc["errors"] else 0


if __name__ == "__main__":
    sys.exit(main())

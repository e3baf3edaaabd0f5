import os
import pathlib

import pytest

from hypothesis import HealthCheck, settings

settings.register_profile(
    "default", max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow]
)
settings.register_profile("thorough", max_examples=500, deadline=None)
settings.load_profile(os.environ.get("FOLDCORR_HYPOTHESIS", "default"))


BENCH = pathlib.Path(__file__).parent / "bench"


@pytest.fixture
def load_bench(monkeypatch):
    """Load ``tests/bench/bench_<topic>.py`` as a module, with its folder importable."""
    import importlib.util

    monkeypatch.syspath_prepend(str(BENCH))

    def load(topic: str):
        spec = importlib.util.spec_from_file_location(f"bench_{topic}", BENCH / f"bench_{topic}.py")
        module = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(module)
        return module

    return load

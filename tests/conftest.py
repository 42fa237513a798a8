"""Shared fixtures: the app factory with test settings, a client, and reference data."""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from threadpoolctl import threadpool_limits

from lagsight import create_app

DATA = Path(__file__).parent / "data"

#: One BLAS thread in the test process, as every service worker runs (serving/gunicorn_conf.py). With the
#: default two OpenBLAS threads on a busy 2-core machine, the engine's many small QR factorisations (the ADF
#: regressions) took about 58 ms each instead of 2 ms, and a batch that answers in seconds reached the
#: 30 s request deadline (a 503) in tests/test_budget.py.
BLAS_LIMIT = threadpool_limits(1)


@pytest.fixture
def app():
    return create_app({"TESTING": True})


@pytest.fixture
def client(app):
    return app.test_client()


def nist_datasets() -> dict[str, tuple[np.ndarray, float]]:
    """The nine NIST StRD univariate sets: name -> (values, certified lag-1 autocorrelation).

    Source: NIST Statistical Reference Datasets, Univariate Summary Statistics
    (tests/data/nist_strd_univariate.json, a copy of ../shared/reference/). NumAcc2-4
    are built from their published construction rule.
    """
    doc = json.loads((DATA / "nist_strd_univariate.json").read_text())
    out = {}
    for name, entry in doc["datasets"].items():
        if "values" in entry:
            values = np.array(entry["values"], dtype=np.float64)
        else:
            first, a, b = {
                "NumAcc2": ("1.2", "1.1", "1.3"),
                "NumAcc3": ("1000000.2", "1000000.1", "1000000.3"),
                "NumAcc4": ("10000000.2", "10000000.1", "10000000.3"),
            }[name]
            values = np.array([float(first)] + [float(a), float(b)] * 500)
        assert values.size == entry["n"]
        out[name] = (values, float(entry["certified"]["lag1_autocorrelation"]))
    return out


def white_noise(n: int, seed: int, m: int | None = None) -> np.ndarray:
    """Seeded i.i.d. standard normal values (a simulated null, not a reference)."""
    rng = np.random.default_rng(seed)
    return rng.standard_normal(n if m is None else (m, n))


@pytest.fixture(scope="session")
def live_server(tmp_path_factory):
    """Base URL of a real gunicorn on a free loopback port, shared by the tests that need one."""
    from .live_server import gunicorn

    with gunicorn(tmp_path_factory.mktemp("live") / "gunicorn.log") as base:
        yield base

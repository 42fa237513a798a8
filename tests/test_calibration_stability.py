"""Simulation: POST /v1/stability locates a change from white noise to AR(1), and rarely reports one in a stable series.

Seeded series of n = 600 sent with window 40 and step 20. The change case: white noise that turns into
AR(1) with phi = 0.6 at t = 300; it counts as located when the first structure change reported (rank 1
among the structure changes) lies within 60 values (10% of n) of t = 300. The stable cases count the
series in which any change is reported. Measured here (300 series each): the switch located in
300/300; a change reported in 18/300 white-noise series (6.0%) and 20/300 AR(1) series (6.7%). The
engine's own 500-series measurement, another seed, is in lagsight/engine/changepoints.py (99.2% located;
4.4% and 6.2% of stable series with a change).
"""
from __future__ import annotations

import numpy as np
import pytest

pytestmark = pytest.mark.slow

N, AT, RUNS = 600, 300, 300


def series(kind: str, rng: np.random.Generator) -> np.ndarray:
    e = rng.standard_normal(N + 100)
    x = np.zeros(N + 100)
    for t in range(1, N + 100):
        phi = 0.6 if kind == "ar1" or (kind == "switch" and t >= AT + 100) else 0.0
        x[t] = phi * x[t - 1] + e[t]
    return x[100:]


def _changes(client, x: np.ndarray) -> list[dict]:
    r = client.post("/v1/stability", json={"values": x.tolist(), "window": 40, "step": 20})
    assert r.status_code == 200, r.get_json()
    return r.get_json()["changes"]["found"]


def test_a_switch_from_white_noise_to_ar1_is_located_within_a_tenth_of_the_length(client):
    rng = np.random.default_rng(600)
    located = 0
    for _ in range(RUNS):
        structure = [c for c in _changes(client, series("switch", rng)) if c["kind"] == "structure"]
        if structure and abs(min(structure, key=lambda c: c["rank"])["index"] - AT) <= 0.1 * N:
            located += 1
    print(f"\nlocated within 10% of n: {located}/{RUNS}")
    assert located >= 0.8 * RUNS


@pytest.mark.parametrize("kind", ["white_noise", "ar1"])
def test_a_stable_series_rarely_gets_a_change(client, kind):
    rng = np.random.default_rng(601)
    reported = sum(bool(_changes(client, series(kind, rng))) for _ in range(RUNS))
    print(f"\n{kind}: a change reported in {reported}/{RUNS}")
    # nominal 5% for both statistics together; measured 4.4% and 6.2% over 500 series (engine docstring)
    assert reported <= 0.10 * RUNS

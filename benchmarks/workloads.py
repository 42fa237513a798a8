"""Seeded, invented inputs: sensor-like series (white noise, AR(1), a weekly-like cycle) of fixed shapes."""
from __future__ import annotations

import numpy as np
from scipy.signal import lfilter


def batch(m: int, n: int, seed: int = 2024) -> np.ndarray:
    """m series of n points: a third white noise, a third AR(1) with phi 0.5, a third with a period-12 cycle."""
    rng = np.random.default_rng(seed)
    e = rng.standard_normal((m, n))
    x = e.copy()
    ar = slice(m // 3, 2 * m // 3)
    x[ar] = lfilter([1.0], [1.0, -0.5], e[ar], axis=1)  # x_t = 0.5 x_{t-1} + e_t
    cyc = slice(2 * m // 3, m)
    x[cyc] += 0.8 * np.sin(2 * np.pi * np.arange(n) / 12)
    return np.round(100.0 + 10.0 * x, 3)  # values as a sensor would send them: offset, scaled, 3 decimals


def batch_body(x: np.ndarray, period: int | None, max_lag: int | None) -> dict:
    body = {"series": [{"id": f"sensor-{i:05d}", "values": row} for i, row in enumerate(x.tolist())]}
    if period is not None:
        body["period"] = period
    if max_lag is not None:
        body["max_lag"] = max_lag
    return body


def long_series(n: int, seed: int = 7) -> np.ndarray:
    return batch(1, n, seed)[0]


def daily_batch(m: int = 2515, shortest: int = 730, longest: int = 1100, period: int = 365,
                seed: int = 0) -> dict:
    """A bakery chain's daily sales: m series of ``shortest`` to ``longest`` days (lengths drawn at random,
    so a few hundred distinct ones) with a yearly cycle, as one brief batch body with period ``period``:
    the batch whose cost was one engine pass and one seasonal decomposition per distinct length."""
    rng = np.random.default_rng(seed)
    series = []
    for i in range(m):
        n = int(rng.integers(shortest, longest + 1))
        x = rng.standard_normal(n) + 2 * np.sin(2 * np.pi * np.arange(n) / period)
        series.append({"id": i, "values": np.round(x, 3).tolist()})
    return {"series": series, "period": period, "detail": "brief"}

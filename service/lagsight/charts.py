"""Chart-ready data: the ``charts`` block of the report, read off the numbers and the series.

Every chart is a small table a plotting library can draw as is:

- ``time_plot``: the analysed series (after transforms), x as time labels or positions,
  null where an observation is missing; long series are thinned to at most
  ``MAX_TIME_POINTS`` by keeping each bucket's lowest and highest point, so peaks survive.
- ``correlogram`` and ``pacf``: per lag the value, the band, a ``zone`` and whether the lag
  is seasonal. Zones: ``inside`` the band; ``marginal`` outside it but within
  ``options.FAR_OUTSIDE_SE`` (3) standard errors of zero; ``far`` beyond that. The standard
  error is the band's half-width divided by the normal quantile z of the confidence.
- ``periodogram``: frequencies (cycles per observation), power, the cumulative periodogram
  and its band, from the report's ``periodogram`` block.

``vega_lite`` is null unless the caller asked for specifications (see vega_lite.py).
"""
from __future__ import annotations

import numpy as np
from scipy.stats import norm

from . import options

MAX_TIME_POINTS = 2000


def zones(values: list, upper: list, confidence: float) -> list:
    """inside / marginal / far for each lag (None where the value is undefined)."""
    z = float(norm.isf((1.0 - confidence) / 2.0))
    out = []
    for v, u in zip(values, upper):
        if v is None or u is None:
            out.append(None)
        elif abs(v) <= u:
            out.append("inside")
        elif z > 0 and abs(v) <= options.FAR_OUTSIDE_SE * u / z:  # z == 0: confidence below float resolution
            out.append("marginal")
        else:
            out.append("far")
    return out


def _thin(y: np.ndarray, limit: int) -> np.ndarray:
    """Indices that keep each bucket's lowest and highest observed point (at most ``limit`` points)."""
    n = y.size
    if n <= limit:
        return np.arange(n)
    buckets = limit // 2
    edges = np.linspace(0, n, buckets + 1).astype(np.int64)
    keep = []
    filled = np.where(np.isnan(y), np.inf, y)
    filled_hi = np.where(np.isnan(y), -np.inf, y)
    for a, b in zip(edges[:-1], edges[1:]):
        lo = a + int(np.argmin(filled[a:b]))
        hi = a + int(np.argmax(filled_hi[a:b]))
        keep.extend(sorted({lo, hi}))
    return np.asarray(keep, dtype=np.int64)


def time_plot(values: np.ndarray, labels: list[str] | None) -> dict:
    keep = _thin(values, MAX_TIME_POINTS)
    y = values[keep]
    return {
        "x": [labels[i] for i in keep.tolist()] if labels is not None else keep.tolist(),
        "x_kind": "time" if labels is not None else "index",
        "values": [None if np.isnan(v) else v for v in y.tolist()],
        "points": int(values.size),
        "thinned": bool(keep.size < values.size),
        "vega_lite": None,
    }


def correlogram(block: dict, confidence: float, seasonal_lags: set[int]) -> dict:
    return {
        "lags": block["lags"],
        "values": block["values"],
        "lower": block["lower"],
        "upper": block["upper"],
        "zone": zones(block["values"], block["upper"], confidence),
        "seasonal": [lag in seasonal_lags for lag in block["lags"]],
        "vega_lite": None,
    }


def periodogram(block: dict | None) -> dict:
    if not block or not block.get("frequencies"):
        return {"frequencies": [], "power": [], "cumulative": [], "lower": [], "upper": [],
                "note": (block or {}).get("note") or "No periodogram was computed for this series.",
                "vega_lite": None}
    return {"frequencies": block["frequencies"], "power": block["power"], "cumulative": block["cumulative"],
            "lower": block.get("lower") or [], "upper": block.get("upper") or [],
            "note": None if block.get("lower") else "The cumulative periodogram's band is not defined here.",
            "vega_lite": None}


def chart_data(values: np.ndarray, labels: list[str] | None, report: dict) -> dict:
    """The ``charts`` block for one report (its numeric keys must be filled)."""
    period = report["period"]
    seasonal = set()
    if period:
        seasonal = {period * j for j in range(1, report["max_lag"] // period + 1)}
    return {
        "time_plot": time_plot(values, labels),
        "correlogram": correlogram(report["acf"], report["confidence"], seasonal),
        "pacf": correlogram(report["pacf"], report["confidence"], seasonal),
        "periodogram": periodogram(report.get("periodogram")),
    }

"""Chart-ready data: the ``charts`` block of the report, read off the numbers and the series.

Every chart is a small table a plotting library can draw as is:

- ``time_plot``: the analysed series (after transforms), x as time labels or positions,
  null where an observation is missing, and ``filled``: the positions in ``values`` of values
  filled in by interpolation; long series are thinned to at most ``MAX_TIME_POINTS`` by keeping
  each bucket's lowest and highest point, so peaks survive.
- ``correlogram`` and ``pacf``: per lag the value, the band, a ``zone`` and whether the lag
  is seasonal. Zones: ``inside`` the band; ``marginal`` outside it but within
  ``options.FAR_OUTSIDE_SE`` (3) standard errors of the band's centre; ``far`` beyond that
  (the report's ``outside`` and ``far`` lags; the standard error is the band's, per lag).
- ``periodogram``: frequencies (cycles per observation), power, the cumulative periodogram
  and its band, from the report's ``periodogram`` block.

``vega_lite`` is null unless the caller asked for specifications (see vega_lite.py).
"""
from __future__ import annotations

import numpy as np

MAX_TIME_POINTS = 2000


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


def time_plot(values: np.ndarray, labels: list[str] | None, filled: np.ndarray | None = None) -> dict:
    if values.size <= MAX_TIME_POINTS:
        keep, y = None, values
        x = list(labels) if labels is not None else list(range(values.size))
    else:
        keep = _thin(values, MAX_TIME_POINTS)
        y = values[keep]
        x = [labels[i] for i in keep.tolist()] if labels is not None else keep.tolist()
    missing = np.isnan(y)
    if filled is not None and filled.size == values.size:
        kept = filled if keep is None else filled[keep]
        filled_at = np.flatnonzero(kept).tolist()
    else:
        filled_at = []
    return {
        "x": x,
        "x_kind": "time" if labels is not None else "index",
        "values": [None if m else v for v, m in zip(y.tolist(), missing.tolist())] if missing.any() else y.tolist(),
        "points": int(values.size),
        "thinned": keep is not None,
        "filled": filled_at,
        "vega_lite": None,
    }


def correlogram(block: dict, zone: list, seasonal: list[bool]) -> dict:
    return {
        "lags": block["lags"],
        "values": block["values"],
        "lower": block["lower"],
        "upper": block["upper"],
        "zone": zone,
        "seasonal": seasonal,
        "vega_lite": None,
    }


NO_PERIODOGRAM_WITH_GAPS = ("The periodogram needs a complete, evenly spaced series, so it is not computed while "
                            "observations are missing; send missing=interpolate to get it.")


def periodogram(block: dict | None, gaps: bool = False) -> dict:
    if not block or not block.get("frequencies"):
        note = NO_PERIODOGRAM_WITH_GAPS if gaps else (block or {}).get("note")
        return {"frequencies": [], "power": [], "cumulative": [], "lower": [], "upper": [],
                "note": note or "No periodogram was computed for this series (too short).", "vega_lite": None}
    return {"frequencies": block["frequencies"], "power": block["power"], "cumulative": block["cumulative"],
            "lower": block.get("lower") or [], "upper": block.get("upper") or [],
            "note": None if block.get("lower") else "The cumulative periodogram's band is not defined here.",
            "vega_lite": None}


def seasonal_flags(max_lag: int, period: int | None) -> list[bool]:
    if not period:
        return [False] * max_lag
    return [lag % period == 0 for lag in range(1, max_lag + 1)]


def block_zones(block: dict) -> list:
    """Zones read off a correlogram block's ``outside`` and ``far`` lags (the report's own classification)."""
    outside, far = set(block["outside"]), set(block["far"])
    return [None if v is None else "far" if lag in far else "marginal" if lag in outside else "inside"
            for lag, v in zip(block["lags"], block["values"])]


def chart_data(values: np.ndarray, labels: list[str] | None, report: dict, seasonal: list[bool] | None = None,
               filled: np.ndarray | None = None) -> dict:
    """The ``charts`` block for one report (its numeric keys must be filled).

    ``seasonal`` is :func:`seasonal_flags` for the report's max_lag and period, when the caller
    has it already (a group of reports shares one); each report gets its own copy.
    """
    seasonal = seasonal_flags(report["max_lag"], report["period"]) if seasonal is None else list(seasonal)
    return {
        "time_plot": time_plot(values, labels, filled),
        "correlogram": correlogram(report["acf"], block_zones(report["acf"]), seasonal),
        "pacf": correlogram(report["pacf"], block_zones(report["pacf"]), seasonal),
        "periodogram": periodogram(report.get("periodogram"), bool(report["missing"]["remaining"])),
    }

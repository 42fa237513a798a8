"""From validated request fields to the series the engine analyses.

This stage owns everything about the data itself: missing values, timestamps
and the seasonal period they imply, and the checks that make the engine's
inputs well defined (enough points, not constant, lags within reach).
Problems raised here carry JSON pointers relative to the series object, so the
batch endpoint can move them under ``/series/<i>``.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from . import options
from .problems import invalid

#: Regular spacing -> seasonal period (the cycle one would look for first).
PERIOD_BY_FREQUENCY = {
    "h": ("hourly", 24),
    "D": ("daily", 7),
    "B": ("business-daily", 5),
    "W": ("weekly", 52),
    "MS": ("monthly", 12),
    "ME": ("monthly", 12),
    "QS": ("quarterly", 4),
    "QE": ("quarterly", 4),
}


@dataclass
class PreparedSeries:
    """A clean series and what was learnt while cleaning it."""

    values: np.ndarray  # usable observations, float64, finite
    n_input: int
    n_missing: int
    period: int | None
    period_source: str | None  # "request", "timestamps" or None
    frequency: str | None  # e.g. "monthly", from timestamps
    name: str | None = None
    warnings: list[dict] = field(default_factory=list)

    @property
    def n(self) -> int:
        return int(self.values.size)


def _warning(code: str, message: str) -> dict:
    return {"code": code, "message": message}


def parse_timestamps(stamps: list[str]) -> pd.DatetimeIndex:
    """Parse ISO 8601 strings; refuse unparsable, mixed-zone, unsorted or duplicate stamps."""
    try:
        index = pd.DatetimeIndex(pd.to_datetime(pd.Series(stamps), format="ISO8601", utc=False))
    except (ValueError, TypeError, OverflowError):
        index = None
    if index is None:
        for i, s in enumerate(stamps):
            try:
                pd.to_datetime(s, format="ISO8601")
            except (ValueError, TypeError, OverflowError):
                raise invalid(f"/timestamps/{i}", f"Not an ISO 8601 date or date-time: {s[:40]!r}.") from None
        raise invalid("/timestamps", "Timestamps must all carry a time zone offset or all carry none.")
    steps = np.diff(index.asi8)
    if steps.size and (steps <= 0).any():
        i = int(np.argmax(steps <= 0)) + 1
        what = "repeats" if steps[i - 1] == 0 else "is earlier than"
        raise invalid(f"/timestamps/{i}", f"Timestamp {stamps[i]!r} {what} the one before it; timestamps must be strictly increasing.")
    return index


def infer_frequency(index: pd.DatetimeIndex) -> tuple[str | None, int | None]:
    """Name the regular spacing of timestamps and the seasonal period it implies."""
    if len(index) < 3:
        return None, None
    with pd.option_context("future.infer_freq_returns_offset", True):
        offset = pd.infer_freq(index)
    if offset is None:
        return None, None
    code = offset.freqstr
    base = code.split("-")[0].lstrip("0123456789") or code
    hit = PERIOD_BY_FREQUENCY.get(base)
    return (hit if hit else (code, None))


def prepare(data: dict, max_points: int) -> PreparedSeries:
    """Check and clean one series.

    Parameters
    ----------
    data : dict
        Loaded fields of one series (``values`` as a float array with NaN for
        null, optional ``timestamps``, ``period``, ``name``).
    max_points : int
        Deployment limit on the points of one series.
    """
    raw = data["values"]
    if raw.size > max_points:
        raise invalid("/values", f"Too many values: {raw.size} > the limit of {max_points}.")
    missing = np.isnan(raw)
    n_missing = int(missing.sum())
    warnings: list[dict] = []
    if n_missing:
        first = int(np.argmax(missing))
        raise invalid(
            f"/values/{first}",
            f"{n_missing} value(s) are missing (null), the first at index {first}; "
            "send a complete series (this version does not fill gaps).",
        )
    values = raw
    period, source, frequency = data.get("period"), ("request" if data.get("period") else None), None
    if data.get("timestamps") is not None:
        index = parse_timestamps(data["timestamps"])
        frequency, implied = infer_frequency(index)
        if frequency is None:
            warnings.append(_warning("irregular_timestamps", "The timestamps are not evenly spaced; they were used only for order, not to infer a period."))
        if period is None and implied is not None:
            period, source = implied, "timestamps"
    n = values.size
    if n < options.MIN_POINTS:
        raise invalid("/values", f"Need at least {options.MIN_POINTS} usable values, got {n}.")
    if values.min() == values.max():  # not np.ptp: max - min overflows for values near +-1.8e308
        raise invalid("/values", "The series is constant; autocorrelation is undefined when there is no variation.")
    if period is not None and period >= n:
        if source == "request":
            raise invalid("/period", f"The period ({period}) must be less than the number of values ({n}).")
        warnings.append(_warning("period_too_long", f"The timestamps suggest a period of {period}, but the series has only {n} values; no seasonal check was made."))
        period, source = None, None
    return PreparedSeries(values, int(raw.size), n_missing, period, source, frequency, data.get("name"), warnings)


def resolve_max_lag(requested: int | None, n: int, period: int | None, limit: int) -> int:
    """The highest lag to analyse: the request's, checked, or the documented default."""
    if requested is None:
        return min(options.default_max_lag(n, period), limit)
    if requested >= n:
        raise invalid("/max_lag", f"max_lag must be less than the number of usable values ({n}), got {requested}.")
    if requested > limit:
        raise invalid("/max_lag", f"max_lag must be at most {limit} (this deployment's limit), got {requested}.")
    return requested

"""Timestamps: parsing, order and duplicate checks, the regular spacing and the gaps in it.

Rules (documented in the OpenAPI file and GET /v1/methods)
----------------------------------------------------------
- ISO 8601 dates or date-times. Either every stamp carries a zone offset (``Z``,
  ``+02:00``) or none does; a mix is refused. Zoned stamps are ordered and compared
  as instants (UTC); daily and coarser spacing is judged on the local wall-clock
  dates, so a daylight-saving change does not break a daily series.
- Times are kept to the microsecond, for years 1 to 9999.
- Stamps must be strictly increasing. The first stamp equal to an earlier one is
  named in a 422; so is the first one earlier than its predecessor.
- The spacing is regular when pandas infers a frequency, or when every stamp lies
  on one regular grid (a fixed step, or whole months, quarters or years from the
  first stamp) of which at least ``options.MIN_OBSERVED_SHARE`` of the slots are
  observed. Slots of that grid without a stamp are gaps: missing observations.
- Spacing maps to a seasonal period (``options.PERIOD_BY_SPACING``): hourly 24,
  daily 7, business-daily 5, weekly 52, monthly 12, quarterly 4; yearly and other
  spacings imply none. Irregular stamps give a warning and are used for order only.
"""
from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from lagsight import options
from lagsight.problems import invalid

_ZONE = re.compile(r"(?:Z|z|[+-]\d{2}(?::?\d{2})?)$")
_HAS_TIME = re.compile(r"\d[T ]\d")
#: Times are held as integer microseconds: years 1 to 9999 fit (nanoseconds would stop at 1677 and 2262).
UNIT = "us"
_DAY = 86400 * 10**6
_FIXED_NAMES = {3600 * 10**6: "hourly", _DAY: "daily", 7 * _DAY: "weekly"}


@dataclass
class TimeAxis:
    """What the timestamps say about the series."""

    frequency: str | None  # "monthly", "15min", ... or None when irregular
    period: int | None  # implied seasonal period
    slots: np.ndarray | None  # position of each stamp on the regular grid (0 = first), None if irregular
    size: int  # number of grid slots (== len(stamps) when there are no gaps)
    labels: list[str] | None  # one ISO label per grid slot (None if irregular: the stamps themselves)
    zoned: bool


def _parse(stamps: list[str], utc: bool) -> pd.DatetimeIndex:
    index = pd.DatetimeIndex(pd.to_datetime(pd.Series(stamps, dtype=object), format="ISO8601", utc=utc))
    return index.as_unit(UNIT)


def _first_unparsable(stamps: list[str]) -> int:
    for i, s in enumerate(stamps):
        try:
            pd.to_datetime(s, format="ISO8601")
        except (ValueError, TypeError, OverflowError):
            return i
    return -1


def parse(stamps: list[str], pointer: str = "/timestamps") -> tuple[pd.DatetimeIndex, pd.DatetimeIndex, bool]:
    """Parse stamps into (instants, wall-clock) indexes; refuse bad, mixed-zone, duplicate or unsorted stamps.

    Both indexes are timezone-naive: instants in UTC, wall-clock in each stamp's own zone.
    """
    zoned = np.array([bool(_ZONE.search(s)) and bool(_HAS_TIME.search(s)) for s in stamps])
    if zoned.any() and not zoned.all():
        i = int(np.argmin(zoned) if zoned[0] else np.argmax(zoned))
        raise invalid(f"{pointer}/{i}", f"Timestamp {stamps[i]!r} {'has no' if zoned[0] else 'has a'} zone offset "
                      f"unlike {stamps[0]!r}; all timestamps must carry a zone offset, or none.")
    is_zoned = bool(zoned.all()) if len(stamps) else False
    try:
        if is_zoned:
            instants = _parse(stamps, utc=True).tz_localize(None)
            wall = _parse([_ZONE.sub("", s) for s in stamps], utc=False)
        else:
            instants = wall = _parse(stamps, utc=False)
    except (ValueError, TypeError, OverflowError):
        i = _first_unparsable(stamps)
        raise invalid(f"{pointer}/{max(i, 0)}", f"Not an ISO 8601 date or date-time: {stamps[max(i, 0)][:40]!r}.") from None
    if instants.tz is not None:  # a lone offset that slipped past the zone check
        instants = instants.tz_convert("UTC").tz_localize(None).as_unit(UNIT)
        wall = instants
    ticks = instants.asi8
    dup = pd.Series(ticks).duplicated().to_numpy()
    if dup.any():
        i = int(np.argmax(dup))
        j = int(np.argmax(ticks == ticks[i]))
        raise invalid(f"{pointer}/{i}", f"Duplicate timestamp: {stamps[i]!r} (index {i}) repeats the time of "
                      f"{stamps[j]!r} (index {j}); send one value per time.")
    steps = np.diff(ticks)
    if steps.size and (steps < 0).any():
        i = int(np.argmax(steps < 0)) + 1
        raise invalid(f"{pointer}/{i}", f"Timestamp {stamps[i]!r} is earlier than the one before it "
                      f"({stamps[i - 1]!r}); timestamps must be in increasing order.")
    return instants, wall, is_zoned


def _name_of(freqstr: str) -> str | None:
    base = freqstr.split("-")[0].lstrip("0123456789")
    if freqstr[0].isdigit() and not freqstr.startswith("1"):
        return None
    return {"h": "hourly", "D": "daily", "B": "business-daily", "W": "weekly", "MS": "monthly", "ME": "monthly",
            "QS": "quarterly", "QE": "quarterly", "YS": "yearly", "YE": "yearly"}.get(base)


def _step_name(step: int) -> str:
    """A fixed step (microseconds) as a pandas-style frequency string: 3D, 2h, 15min, 30s, 250ms."""
    for unit, size in (("D", _DAY), ("h", 3600 * 10**6), ("min", 60 * 10**6), ("s", 10**6), ("ms", 10**3)):
        if step % size == 0:
            return f"{step // size}{unit}"
    return f"{step}us"


def _label(index: pd.DatetimeIndex, zoned: bool) -> list[str]:
    has_time = bool((index.as_unit(UNIT).asi8 % _DAY).any())
    fmt = "%Y-%m-%dT%H:%M:%S" if has_time else "%Y-%m-%d"
    out = index.strftime(fmt).tolist()
    return [s + "Z" for s in out] if zoned and has_time else out


def _on_grid(index: pd.DatetimeIndex, grid: pd.DatetimeIndex) -> np.ndarray | None:
    pos = grid.as_unit(UNIT).get_indexer(index)
    return None if (pos < 0).any() else pos


def _calendar_grids(wall: pd.DatetimeIndex, limit: int):
    """Candidate calendar grids, coarsest first: (name, grid). Grids longer than ``limit`` are not built."""
    start, end = wall[0], wall[-1]
    months = (end.year - start.year) * 12 + end.month - start.month
    month_end = (wall + pd.offsets.MonthEnd(0) == wall).all()
    for name, step in (("yearly", 12), ("quarterly", 3), ("monthly", 1)):
        if months // step + 1 > limit:
            return
        offset = pd.offsets.MonthEnd(step) if month_end else pd.DateOffset(months=step)
        try:
            yield name, pd.date_range(start, end, freq=offset, unit=UNIT)
        except (ValueError, OverflowError):  # a step past year 9999
            continue
    if (wall.day_of_week < 5).all() and (end - start).days * 5 // 7 + 1 <= limit:
        yield "business-daily", pd.date_range(start, end, freq="B", unit=UNIT)


def describe(stamps: list[str], max_slots: int, pointer: str = "/timestamps") -> TimeAxis:
    """Check the stamps and describe their spacing, the implied period and any gaps."""
    instants, wall, zoned = parse(stamps, pointer)
    n = len(stamps)
    if n < 3:
        return TimeAxis(None, None, None, n, None, zoned)
    limit = min(max_slots, int(np.floor(n / options.MIN_OBSERVED_SHARE)))
    # 1. complete and regular, as pandas sees it (instants first: hourly data across a DST change)
    for idx in (instants, wall) if zoned else (wall,):
        with pd.option_context("future.infer_freq_returns_offset", True):
            offset = pd.infer_freq(idx)
        if offset is not None:
            name = _name_of(offset.freqstr)
            label = name or offset.freqstr
            return TimeAxis(label, options.PERIOD_BY_SPACING.get(name) if name else None, np.arange(n), n,
                            _label(idx, zoned and idx is instants), zoned)
    # 2. whole months, quarters or years from the first stamp, or business days, with gaps
    wall_ok = not zoned or bool((np.diff(wall.asi8) > 0).all())  # local clocks can repeat or run back
    if wall_ok and (wall.asi8 % _DAY == wall.asi8[0] % _DAY).all():
        for name, grid in _calendar_grids(wall, limit):
            if len(grid) > limit:
                continue
            pos = _on_grid(wall, grid)
            if pos is not None:
                return TimeAxis(name, options.PERIOD_BY_SPACING[name], pos, len(grid), _label(grid, False), zoned)
    # 3. a fixed step (the smallest one seen) with gaps: on wall-clock dates for daily and coarser steps
    for idx, daily_or_more in ((wall, True), (instants, False)) if zoned else ((wall, None),):
        ticks = idx.asi8
        step = int(np.diff(ticks).min())
        if step <= 0 or (daily_or_more is not None and (step >= _DAY) != daily_or_more):
            continue
        offsets = ticks - ticks[0]
        if (offsets % step).any():
            continue
        size = int(offsets[-1] // step) + 1
        if size > limit:
            continue
        name = _FIXED_NAMES.get(step)
        label = name or _step_name(step)
        grid = pd.DatetimeIndex((ticks[0] + step * np.arange(size, dtype=np.int64)).astype(f"datetime64[{UNIT}]"))
        return TimeAxis(label, options.PERIOD_BY_SPACING.get(name) if name else None, offsets // step, size,
                        _label(grid, zoned and not daily_or_more), zoned)
    return TimeAxis(None, None, None, n, None, zoned)

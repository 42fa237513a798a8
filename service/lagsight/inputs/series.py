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

from lagsight import options
from lagsight.engine.masked import pair_counts
from lagsight.inputs import timestamps, transforms
from lagsight.problems import counted, invalid


@dataclass
class PreparedSeries:
    """A clean series and what was learnt while cleaning it."""

    values: np.ndarray  # float64 on a regular grid; NaN only where missing and missing == "pairwise"
    n_input: int
    n_missing: int
    period: int | None
    period_source: str | None  # "request", "timestamps" or None
    frequency: str | None  # e.g. "monthly", from timestamps
    name: str | None = None
    warnings: list[dict] = field(default_factory=list)
    labels: list[str] | None = None  # a time label per analysed point, when timestamps were sent
    missing: dict = field(default_factory=dict)  # the report's ``missing`` block
    transform: dict = field(default_factory=dict)  # the report's ``transform`` block
    filled: np.ndarray | None = None  # True where a value was interpolated (the verdict leaves those out)

    def __post_init__(self):
        """Complete blocks for a series built directly (nothing missing, no transform)."""
        if not self.missing:
            self.missing = {"method": options.DEFAULT_MISSING, "count": 0, "from_nulls": 0, "from_gaps": 0,
                            "dropped_at_ends": 0, "interpolated": 0, "remaining": 0, "effective_n": None,
                            "note": None}
        if not self.transform:
            self.transform = {"steps": [], "n_before": int(self.values.size), "n_after": int(self.values.size)}

    @property
    def n(self) -> int:
        """Observed points analysed."""
        return int(np.count_nonzero(~np.isnan(self.values))) if self.has_gaps else int(self.values.size)

    @property
    def length(self) -> int:
        """Points on the time grid analysed, missing ones included."""
        return int(self.values.size)

    @property
    def has_gaps(self) -> bool:
        return bool(self.missing.get("method") == "pairwise" and np.isnan(self.values).any())

    @property
    def mask(self) -> np.ndarray | None:
        return ~np.isnan(self.values) if self.has_gaps else None


def _warning(code: str, message: str) -> dict:
    return {"code": code, "message": message}


def _refuse_missing(raw_missing: np.ndarray, axis: timestamps.TimeAxis | None, stamps, n_null: int, n_gaps: int):
    hint = 'send missing = "interpolate" or "pairwise" to analyse it anyway.'
    if n_null:
        first = int(np.argmax(raw_missing))
        said = counted(n_null, "value is", "values are")
        return invalid(f"/values/{first}", f"{said} missing (null), the first at index {first}; {hint}")
    jumps = np.diff(axis.slots)
    i = int(np.argmax(jumps > 1)) + 1
    steps = counted(n_gaps, "step", "steps")
    return invalid(f"/timestamps/{i}", f"The {axis.frequency} timestamps skip {steps} in all, the first "
                                       f"{int(jumps[i - 1]) - 1} between {stamps[i - 1]!r} and {stamps[i]!r}; {hint}")


def _fill_missing(values: np.ndarray, method: str, warnings: list, labels):
    """Drop missing values at the ends; interpolate inside when asked.

    Returns values, labels, dropped and the mask of filled values (None when none was filled).
    """
    missing = np.isnan(values)
    observed = np.flatnonzero(~missing)
    if observed.size < options.MIN_POINTS:
        raise invalid("/values", f"Need at least {options.MIN_POINTS} observed values, got {observed.size}.")
    lo, hi = int(observed[0]), int(observed[-1]) + 1
    dropped = values.size - (hi - lo)
    if dropped:
        warnings.append(_warning("missing_ends_dropped", f"{counted(dropped, 'missing value', 'missing values')} at "
                                                         f"the start or end {'was' if dropped == 1 else 'were'} "
                                                         "dropped: they cannot be interpolated or paired."))
        values, missing = values[lo:hi], missing[lo:hi]
        labels = labels[lo:hi] if labels is not None else None
    filled = None
    if method == "interpolate" and missing.any():
        t = np.arange(values.size)
        values = values.copy()
        values[missing] = np.interp(t[missing], t[~missing], values[~missing])
        filled = missing
    return values, labels, dropped, filled


def prepare(data: dict, max_points: int, axes: dict | None = None) -> PreparedSeries:
    """Check and clean one series.

    Parameters
    ----------
    data : dict
        Loaded fields of one series (``values`` as a float array with NaN for
        null, optional ``timestamps``, ``period``, ``name``, ``missing``, ``transform``).
    max_points : int
        Deployment limit on the points of one series (time-grid slots included).
    axes : dict, optional
        Time axes already described in this request, by their timestamps: series of a batch
        often share one list of stamps, and parsing it costs about 1 ms. Filled as it goes.

    Notes
    -----
    Order: timestamps (order, duplicates, spacing, gaps) -> missing values
    (refuse, interpolate or pairwise) -> transforms -> checks. Problems carry
    pointers relative to the series object.
    """
    raw = data["values"]
    if raw.size > max_points:
        raise invalid("/values", f"Too many values: {raw.size} > the limit of {max_points}.")
    method = data.get("missing") or options.DEFAULT_MISSING
    warnings: list[dict] = []
    period, source, frequency = data.get("period"), ("request" if data.get("period") else None), None
    values, labels, axis, stamps = raw, None, None, data.get("timestamps")
    raw_missing = np.isnan(raw)
    n_null, n_gaps = int(np.count_nonzero(raw_missing)), 0
    if stamps is not None:
        key = tuple(stamps) if axes is not None else None
        axis = axes.get(key) if key is not None else None
        if axis is None:
            axis = timestamps.describe(stamps, max_points)
            if key is not None:
                axes[key] = axis  # only a valid axis is kept: a refused one is refused again, per series
        frequency = axis.frequency
        if axis.slots is None:
            labels = list(stamps)
            if raw.size >= 3:
                warnings.append(_warning("irregular_timestamps", "The timestamps are not evenly spaced; they were used "
                                         "only for order, not to infer a period or find gaps."))
        else:
            labels = list(axis.labels)  # this series' own list: the axis may be shared with others
            if axis.size > raw.size:
                n_gaps = axis.size - raw.size
                values = np.full(axis.size, np.nan)
                values[axis.slots] = raw
        if period is None and axis.period is not None:
            period, source = axis.period, "timestamps"
    n_missing = n_null + n_gaps
    dropped = 0
    filled_mask = None
    if n_missing:
        if method == "refuse":
            raise _refuse_missing(raw_missing, axis, stamps, n_null, n_gaps)
        values, labels, dropped, filled_mask = _fill_missing(values, method, warnings, labels)
    filled = 0 if filled_mask is None else int(filled_mask.sum())
    n_grid = values.size
    complete = not n_missing  # no NaN anywhere, so the counts below need no scan of the values
    n_before = n_grid if complete else int(np.count_nonzero(~np.isnan(values)))
    if period is not None and period >= n_grid and source == "request":
        raise invalid("/period", f"The period ({period}) must be less than the number of values ({n_grid}).")
    values_before = values
    values, steps, front = transforms.apply(values, data.get("transform"), period)
    if labels is not None and front:
        labels = labels[front:]
    if filled_mask is not None:
        filled_mask = _carry_filled(filled_mask, steps, values.size)
    complete = complete and not steps
    observed = values if complete else values[~np.isnan(values)]
    n = observed.size
    if n < options.MIN_POINTS:
        raise invalid("/values", f"Need at least {options.MIN_POINTS} usable values, got {n}.")
    if observed.min() == observed.max() or (steps and transforms.rounding_only(observed, values_before)):  # not np.ptp: max - min overflows for values near +-1.8e308
        what = " after the transforms" if steps else ""
        raise invalid("/transform" if steps else "/values",
                      f"The series is constant{what}; autocorrelation is undefined when there is no variation.")
    if period is not None and period >= values.size:
        warnings.append(_warning("period_too_long", f"The timestamps suggest a period of {period}, but the series "
                                                    f"has only {values.size} values; no seasonal check was made."))
        period, source = None, None
    missing_block = {
        "method": method, "count": n_missing, "from_nulls": n_null, "from_gaps": n_gaps,
        "dropped_at_ends": dropped, "interpolated": filled,
        "remaining": 0 if complete else int(np.count_nonzero(np.isnan(values))), "effective_n": None,
        "note": _missing_note(method, n_missing, dropped, filled),
    }
    transform_block = {"steps": steps, "n_before": n_before, "n_after": int(n)}
    return PreparedSeries(values, int(raw.size), n_missing, period, source, frequency, data.get("name"), warnings,
                          labels, missing_block, transform_block, filled_mask)


def _carry_filled(mask: np.ndarray, steps: list[dict], size: int) -> np.ndarray:
    """Where the transformed values rest on a filled one: a difference at lag L is filled when either of its
    two values was."""
    for step in steps:
        if step["step"] in ("difference", "seasonal_difference"):
            for _ in range(step["order"]):
                lag = step["lag"]
                mask = mask[lag:] | mask[:-lag]
    return mask[-size:]


def _missing_note(method: str, count: int, dropped: int, filled: int) -> str | None:
    if not count:
        return None
    if method == "interpolate":
        return (f"{counted(filled, 'missing value was', 'missing values were')} filled by straight lines between their "
                "neighbours"
                + (f" and {dropped} at the ends dropped" if dropped else "")
                + "; filled values make the series smoother and can raise low-lag autocorrelation.")
    return ("Autocovariances use only the pairs observed at each lag (the amplitude-modulated estimator, "
            "Parzen 1963); the band and the portmanteau statistics use each lag's effective size "
            "n_k = n * (pairs at lag k) / (n - k), so the band widens where pairs are scarce.")


def resolve_max_lag(requested: int | None, n: int, period: int | None, limit: int) -> int:
    """The highest lag to analyse: the request's, checked, or the documented default."""
    if requested is None:
        return min(options.default_max_lag(n, period), limit)
    if requested >= n:
        raise invalid("/max_lag", f"max_lag must be less than the number of usable values ({n}), got {requested}.")
    if requested > limit:
        raise invalid("/max_lag", f"max_lag must be at most {limit} (this deployment's limit), got {requested}.")
    return requested


def limit_to_paired_lags(series: PreparedSeries, mask: np.ndarray, max_lag: int, requested: bool) -> int:
    """With missing values, keep to lags spanned by at least options.MIN_PAIRS complete pairs.

    A requested max_lag beyond that is refused; the default is lowered, with a warning.
    """
    pairs = pair_counts(mask[None, :], max_lag)[0, 1:]
    short = np.flatnonzero(pairs < options.MIN_PAIRS)
    if not short.size:
        return max_lag
    lag = int(short[0]) + 1
    if requested or lag == 1:
        raise invalid("/max_lag" if requested else "/values",
                      f"Lag {lag} has only {counted(int(pairs[lag - 1]), 'pair', 'pairs')} of observed values; "
                      "at least "
                      f"{options.MIN_PAIRS} are needed at every lag analysed"
                      + (f": lower max_lag below {lag}." if requested else "."))
    series.warnings.append(_warning("max_lag_lowered", f"max_lag was lowered to {lag - 1}: lag {lag} has fewer than "
                                                      f"{options.MIN_PAIRS} pairs of observed values."))
    return lag - 1

"""The body of POST /v1/stability, and the windows it asks for.

A series with the diagnosis options, and ``window`` (values per window) with ``step`` (values between
the starts of consecutive windows; default half a window). Windows start at 0, step, 2 step, ... while
they fit, and one more window ends at the last value when the steps do not reach it, so the most recent
values are always diagnosed.
"""
from __future__ import annotations

from marshmallow import validate

from lagsight import options
from lagsight.inputs.schema import AnalysisOptions, SeriesFields, StrictInteger


class StabilityRequest(SeriesFields, AnalysisOptions):
    """Body of POST /v1/stability."""

    class Meta:
        exclude = ("horizon",)  # windows are read by their lag-1 autocorrelation: one-step values

    window = StrictInteger(required=True, validate=validate.Range(min=options.STABILITY_MIN_WINDOW))
    step = StrictInteger(load_default=None, allow_none=True, validate=validate.Range(min=1))


def window_starts(length: int, window: int, step: int) -> list[int]:
    """Starts of the windows over ``length`` values (window <= length), the last ending at the last value."""
    starts = list(range(0, length - window + 1, step))
    if starts[-1] + window < length:
        starts.append(length - window)
    return starts

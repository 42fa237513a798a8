"""The body of POST /v1/driver-check, and each driver lined up with the series.

The series and every driver are prepared on their own, as /v1/diagnostics prepares a series (their
timestamps, the request's ``missing`` and ``transform``). A driver is then lined up with the series by
the time labels they share when both came with timestamps, and by position otherwise (when their
lengths match). Problems about a driver point under ``/drivers/<i>``.
"""
from __future__ import annotations

import numpy as np
from marshmallow import RAISE, Schema, ValidationError, fields, validate, validates_schema

from lagsight import options
from lagsight.inputs.schema import NumberArray, SeriesFields, StampList, StrictFloat, StrictInteger, stamps_match_values
from lagsight.inputs.series import PreparedSeries, prepare
from lagsight.problems import FieldError, Problem, counted, invalid


class DriverFields(Schema):
    """One candidate driver."""

    class Meta:
        unknown = RAISE

    name = fields.String(required=True, validate=validate.Length(min=1, max=200))
    values = NumberArray(required=True)
    timestamps = StampList(load_default=None)

    @validates_schema
    def _timestamps_match(self, data, **kwargs):
        if not stamps_match_values(data):
            raise ValidationError(f"Must have the same length as values ({len(data['values'])}), got "
                                  f"{len(data['timestamps'])}.", "timestamps")


class DriverCheckRequest(SeriesFields):
    """Body of POST /v1/driver-check."""

    drivers = fields.List(fields.Nested(DriverFields), required=True,
                          validate=validate.Length(min=1, max=options.DRIVER_MAX))
    max_lag = StrictInteger(load_default=None, allow_none=True, validate=validate.Range(min=1))
    confidence = StrictFloat(load_default=options.DEFAULT_CONFIDENCE,
                             validate=validate.Range(min=0, max=1, min_inclusive=False, max_inclusive=False))

    @validates_schema
    def _names(self, data, **kwargs):
        names = [d["name"] for d in data.get("drivers") or []]
        if len(set(names)) != len(names):
            raise ValidationError("Each driver needs its own name.", "drivers")


def prepare_driver(driver: dict, data: dict, index: int, max_points: int) -> PreparedSeries:
    """One driver prepared with the request's missing-value rule and transforms (pointers under /drivers/i)."""
    fields_ = {"values": driver["values"], "timestamps": driver["timestamps"], "period": None,
               "name": driver["name"], "missing": data["missing"], "transform": data["transform"]}
    try:
        return prepare(fields_, max_points)
    except Problem as problem:
        problem.errors = [e.under(f"/drivers/{index}") for e in problem.errors]
        raise


def line_up(series: PreparedSeries, driver: PreparedSeries, index: int) -> tuple[np.ndarray, np.ndarray, list | None]:
    """The series' and the driver's values at the same times, and their shared labels (None without timestamps)."""
    if series.labels is not None and driver.labels is not None:
        where = {label: i for i, label in enumerate(driver.labels)}
        pairs = [(i, where[label]) for i, label in enumerate(series.labels) if label in where]
        if len(pairs) < options.DRIVER_MIN_POINTS:
            raise invalid(f"/drivers/{index}/timestamps",
                          f"The driver shares {counted(len(pairs), 'time', 'times')} with the series; at least "
                          f"{options.DRIVER_MIN_POINTS} are needed (the same spacing and stamp format on both).")
        mine, theirs = (np.array(p) for p in zip(*pairs))
        return series.values[mine], driver.values[theirs], [series.labels[i] for i in mine]
    if series.length != driver.length:
        detail = (f"The driver has {driver.length} values and the series {series.length} (after missing values and "
                  "transforms); send the same number, or timestamps with both to line them up.")
        raise Problem("invalid-content", detail, [FieldError(f"/drivers/{index}/values", detail)])
    return series.values, driver.values, series.labels if series.labels is not None else driver.labels

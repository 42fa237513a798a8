"""POST /v1/driver-check: does a candidate driver still move with the series, and at which lags?

The series and each driver are prepared and lined up by :mod:`lagsight.inputs.drivers`; the
prewhitened cross-correlation and Haugh's test come from :mod:`lagsight.engine.crosscorrelation`.
"""
from __future__ import annotations

import numpy as np
from flask import Blueprint, current_app, request

from lagsight import options
from lagsight.engine.crosscorrelation import check
from lagsight.inputs.drivers import DriverCheckRequest, line_up, prepare_driver
from lagsight.inputs.series import prepare
from lagsight.outputs import drivers as outputs
from lagsight.problems import FieldError, Problem, invalid
from lagsight.web import metrics
from lagsight.web.diagnostics import load
from lagsight.web.payload import read_json_object
from lagsight.web.responses import json_response, require_json

bp = Blueprint("drivers", __name__)
_SCHEMA = DriverCheckRequest()


def _check_size(data: dict, cfg) -> None:
    """413 before the work when the series and the drivers together pass the batch limit on values."""
    total = data["values"].size + sum(d["values"].size for d in data["drivers"])
    if total > cfg["MAX_BATCH_POINTS"]:
        detail = (f"Too many values: {total} in the series and drivers together > this deployment's limit of "
                  f"{cfg['MAX_BATCH_POINTS']} per request.")
        raise Problem("payload-too-large", detail, [FieldError("/drivers", detail)])


def _lags(requested: int | None, n: int, index: int) -> int:
    if requested is None:
        return max(1, min(options.DRIVER_DEFAULT_LAG, n // 5))
    if requested > n // 4:
        raise invalid("/max_lag", f"max_lag must be at most a quarter of the values the series shares with "
                                  f"/drivers/{index} ({n // 4} of {n}), got {requested}.")
    return requested


@bp.post("/v1/driver-check")
def driver_check():
    """Prewhiten each driver, cross-correlate it with the series and judge the link."""
    require_json(request)
    cfg = current_app.config
    data = load(_SCHEMA, read_json_object(request))
    _check_size(data, cfg)
    if data["missing"] == "pairwise":
        raise invalid("/missing", 'The driver check needs complete series: use missing "interpolate" (or "refuse").')
    series = prepare(data, cfg["MAX_POINTS"])
    blocks = []
    for i, driver in enumerate(data["drivers"]):
        prepared = prepare_driver(driver, data, i, cfg["MAX_POINTS"])
        y, x, labels = line_up(series, prepared, i)
        if y.size < options.DRIVER_MIN_POINTS:
            raise invalid(f"/drivers/{i}/values", f"The driver and the series share {y.size} values; at least "
                                                  f"{options.DRIVER_MIN_POINTS} are needed.")
        if np.ptp(x) == 0 or np.ptp(y) == 0:
            raise invalid(f"/drivers/{i}/values", "The driver or the series is constant where they overlap.")
        found = check(y, x, _lags(data["max_lag"], y.size, i), min(options.DRIVER_MAX_AR_ORDER, y.size // 10))
        metrics.record_analysed(2, 2 * int(y.size))
        blocks.append(outputs.driver_block(driver["name"], int(y.size), labels, found, data["confidence"]))
    return json_response(outputs.answer(series.name, series.n, data["confidence"], blocks))

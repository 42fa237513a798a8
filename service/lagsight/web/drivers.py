"""POST /v1/driver-check: does a candidate driver still move with the series, and at which lags?

The series and each driver are prepared and lined up by :mod:`lagsight.inputs.drivers`; the
prewhitened cross-correlation and Haugh's test come from :mod:`lagsight.engine.crosscorrelation`.
The content is handled by :func:`lagsight.follow_up.driver_check`, as ``lagsight.driver_check`` does; what
stays here is HTTP's: the request's size and its cost budget (web/budget.py).
"""
from __future__ import annotations

from flask import Blueprint, current_app, request

from lagsight import follow_up
from lagsight.problems import FieldError, Problem
from lagsight.web import budget, metrics
from lagsight.web.diagnostics import load
from lagsight.web.payload import read_json_object
from lagsight.web.responses import json_response, require_json

bp = Blueprint("drivers", __name__)


def _check_size(data: dict, cfg) -> None:
    """413 before the work when the series and the drivers together pass the batch limit on values."""
    total = data["values"].size + sum(d["values"].size for d in data["drivers"])
    if total > cfg["MAX_BATCH_POINTS"]:
        detail = (f"Too many values: {total} in the series and drivers together > this deployment's limit of "
                  f"{cfg['MAX_BATCH_POINTS']} per request.")
        raise Problem("payload-too-large", detail, [FieldError("/drivers", detail)])


@bp.post("/v1/driver-check")
def driver_check():
    """Prewhiten each driver, cross-correlate it with the series and judge the link."""
    require_json(request)
    cfg = current_app.config
    data = load(follow_up.DRIVER_CHECK, read_json_object(request))
    _check_size(data, cfg)
    budget.check_driver_check(data, cfg)
    late = budget.checkpoint("drivers", "Send fewer drivers per request, or fewer values.")
    return json_response(follow_up.driver_check(data, cfg, metrics.record_analysed, late))

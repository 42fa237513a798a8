"""POST /v1/model-check: fit a seasonal ARIMA model to a series and diagnose what it leaves.

The series is read and prepared exactly as for /v1/diagnostics (timestamps, missing values, transforms),
then fitted by statsmodels' SARIMAX (lagsight.engine.arima) with the order sent, or with the order
chosen by a small AICc search (lagsight.engine.arima_search). The series as sent and the fit's
residuals are diagnosed by the same pipeline as every other route, the residuals with ``model_df`` set
to the fit's AR and MA terms, and the two readings are compared. The content is handled by
:func:`lagsight.follow_up.model_check`, as ``lagsight.model_check`` does; the request's cost is estimated
(web/budget.py) before any fit.
"""
from __future__ import annotations

from flask import Blueprint, current_app, request

from lagsight import follow_up
from lagsight.web import budget, metrics
from lagsight.web.diagnostics import load
from lagsight.web.payload import read_json_object
from lagsight.web.responses import json_response, require_json

bp = Blueprint("model_check", __name__)


@bp.post("/v1/model-check")
def model_check():
    """Fit the model, diagnose its residuals and compare them with the series."""
    require_json(request)
    cfg = current_app.config
    data = load(follow_up.MODEL_CHECK, read_json_object(request))
    budget.check_model_check(data, cfg)
    late = budget.checkpoint("series (the series as sent and the residuals)", "Send fewer values or a smaller order.")
    return json_response(follow_up.model_check(data, cfg, metrics.record_analysed, metrics.record_fits, late))

"""POST /v1/model-check: fit a seasonal ARIMA model to a series and diagnose what it leaves.

The series is read and prepared exactly as for /v1/diagnostics (timestamps, missing values, transforms),
then fitted by statsmodels' SARIMAX (lagsight.engine.arima) with the order sent, or with the order
chosen by a small AICc search (lagsight.engine.arima_search). The series as sent and the fit's
residuals are diagnosed by the same pipeline as every other route, the residuals with ``model_df`` set
to the fit's AR and MA terms, and the two readings are compared.
"""
from __future__ import annotations

import numpy as np
from flask import Blueprint, current_app, request

from lagsight import options
from lagsight.engine.arima import TRENDS, FitError, Fitted, Order, cost, fit
from lagsight.engine.arima_search import search, start_order
from lagsight.inputs.model_check import ModelCheckRequest
from lagsight.inputs.series import PreparedSeries, prepare
from lagsight.outputs import model_check as outputs
from lagsight.pipeline import plan_for, run
from lagsight.problems import FieldError, Problem, invalid
from lagsight.web import metrics
from lagsight.web.diagnostics import load
from lagsight.web.payload import read_json_object
from lagsight.web.responses import json_response, require_json

bp = Blueprint("model_check", __name__)
_SCHEMA = ModelCheckRequest()


def _explicit(data: dict, series: PreparedSeries) -> Order:
    p, d, q = data["order"]
    P, D, Q, s = data["seasonal_order"] or (0, 0, 0, 0)
    if s and s >= series.length:
        raise invalid("/seasonal_order/3", f"The seasonal period s ({s}) must be less than the number of values "
                                           f"({series.length}).")
    trend = data["trend"] or ("constant" if d + D == 0 else "none")
    order = Order(p, d, q, P, D, Q, s, TRENDS[trend])
    return order if order.seasonal or not s else order.neighbour(s=0)


def _check_size(order: Order, n: int, length: int, pointer: str) -> None:
    """422 when the series is too short for the model, or one fit would pass the work budget."""
    needed = order.d + order.D * order.s + order.arma_terms + len(order.trend.replace("n", "")) + 1 + \
        options.MIN_POINTS
    if n < needed:
        raise invalid(pointer, f"{order.label()} needs at least {needed} usable values (its differencing, its "
                               f"{order.arma_terms} AR and MA terms, trend and variance, and {options.MIN_POINTS} "
                               f"residuals to diagnose), got {n}.")
    units = cost(order, length)
    if units > options.MODEL_WORK_BUDGET:
        raise invalid(pointer, f"Fitting {order.label()} to {length} values would take about {units:,} units of "
                               f"work (n (k + 4)^2 (terms + 2) with {order.states} states), more than this "
                               f"service's budget of {options.MODEL_WORK_BUDGET:,} per request; send fewer values "
                               "or a smaller (seasonal) order.")


def _fit_explicit(y: np.ndarray, order: Order) -> Fitted:
    try:
        fitted = fit(y, order)
    except FitError as err:
        raise invalid("/order", f"{order.label()} could not be fitted: {err}.") from None
    finally:
        metrics.record_fits(1)
    if not fitted.converged:
        raise invalid("/order", f"The fit of {order.label()} did not converge within statsmodels' iteration limit "
                                f"(log-likelihood reached {fitted.loglik:.6g}); its estimates are not reliable. Try a "
                                'smaller order, or order "suggested".')
    return fitted


def _fit_suggested(y: np.ndarray, series: PreparedSeries, confidence: float):
    start = start_order(y, series.period, confidence)
    _check_size(start, series.n, series.length, "/order")
    found = search(y, start, series.period, options.MODEL_SEARCH_FITS, options.MODEL_WORK_BUDGET)
    metrics.record_fits(len(found.tried))
    if found.best is None:
        failures = "; ".join(f"{t.order.label()}: {t.failure or 'did not converge'}" for t in found.tried)
        raise invalid("/order", f"No order of the search could be fitted and converge ({failures}); send an "
                                "explicit order.")
    return found.best.fitted, found


def _residual_series(series: PreparedSeries, fitted: Fitted, cfg) -> PreparedSeries:
    values = fitted.residuals
    period = series.period if series.period is not None and series.period < values.size else None
    fields = {"values": values, "timestamps": None, "period": period, "name": series.name, "transform": None,
              "missing": "pairwise" if np.isnan(values).any() else "refuse"}
    try:
        out = prepare(fields, cfg["MAX_POINTS"])
    except Problem as problem:
        detail = f"The residuals of {fitted.order.label()} cannot be diagnosed: {problem.detail}"
        raise invalid("/order", detail) from None
    out.period_source = series.period_source if period is not None else None
    out.frequency = series.frequency
    out.labels = series.labels[fitted.burn:] if series.labels is not None else None
    return out


def _residual_plan(resid: PreparedSeries, data: dict, arma_terms: int, cfg):
    try:
        return plan_for(resid, {**data, "model_df": arma_terms}, cfg)
    except Problem as problem:
        problem.errors = [FieldError("/order" if e.pointer == "/model_df" else e.pointer, e.detail)
                          for e in problem.errors]
        raise


@bp.post("/v1/model-check")
def model_check():
    """Fit the model, diagnose its residuals and compare them with the series."""
    require_json(request)
    cfg = current_app.config
    data = load(_SCHEMA, read_json_object(request))
    series = prepare(data, cfg["MAX_POINTS"])
    before_plan = plan_for(series, {**data, "model_df": 0}, cfg)
    y = series.values
    if data["order"] == options.MODEL_SUGGESTED:
        fitted, found = _fit_suggested(y, series, data["confidence"])
    else:
        order = _explicit(data, series)
        _check_size(order, series.n, series.length, "/order")
        fitted, found = _fit_explicit(y, order), None
    resid = _residual_series(series, fitted, cfg)
    after_plan = _residual_plan(resid, data, fitted.order.arma_terms, cfg)
    before, after = run([(series, before_plan), (resid, after_plan)], observe=metrics.record_analysed,
                        charts=True)  # the residuals' report keeps its chart data (the time plot of the fit)
    return json_response(outputs.answer(series.name, fitted, found, after, before, options.MODEL_SEARCH_FITS,
                                        options.MODEL_WORK_BUDGET))

"""The routes that follow a diagnosis, without HTTP: a model check, a driver check and stability over time.

The views of :mod:`lagsight.web` (``/v1/model-check``, ``/v1/driver-check``, ``/v1/stability``) and the Python API
(:func:`lagsight.model_check`, :func:`lagsight.driver_check`, :func:`lagsight.stability`) call these functions, so a
body (or the same values and options given in Python) is checked, prepared and answered one way, with one set of
errors (:class:`~lagsight.problems.Problem`, pointers into the request body). What stays in the views is HTTP's
own: reading the body, its size, the image formats, the cost budget and the deadline.

Each function takes the loaded body (:func:`lagsight.handling.load` with the schema named here) and ``limits``, a
mapping with MAX_POINTS, MAX_LAG, MAX_REPLICATES, MAX_SIMULATED_VALUES, MAX_SERIES and MAX_BATCH_POINTS; the
callbacks ``observe(series, points)`` and ``fits(count)``, when given, count the work (the web layer's metrics), and
``checkpoint(done, total)`` is called before each remaining piece of work (a driver, the residuals' diagnosis, an
engine pass over windows) so that the web layer can stop a request at its deadline.
"""
from __future__ import annotations

import secrets
from collections.abc import Callable

import numpy as np

from lagsight import options
from lagsight.engine.arima import TRENDS, FitError, Fitted, Order, cost, fit
from lagsight.engine.arima_search import search, start_order
from lagsight.engine.changepoints import MIN_BLOCKS, find_changes
from lagsight.engine.crosscorrelation import check
from lagsight.inputs.drivers import DriverCheckRequest, line_up, prepare_driver
from lagsight.inputs.model_check import ModelCheckRequest
from lagsight.inputs.series import PreparedSeries, prepare
from lagsight.inputs.stability import StabilityRequest, window_starts
from lagsight.outputs import drivers as driver_outputs
from lagsight.outputs import model_check as model_outputs
from lagsight.outputs import stability as stability_outputs
from lagsight.pipeline import plan_for, run, run_blocks
from lagsight.problems import FieldError, Problem, invalid

MODEL_CHECK = ModelCheckRequest()
DRIVER_CHECK = DriverCheckRequest()
STABILITY = StabilityRequest()


def _count(callback: Callable | None, *args) -> None:
    if callback is not None:
        callback(*args)


# --- model check --------------------------------------------------------------------------------------------

def order_sent(data: dict) -> Order:
    """The order sent ([p, d, q], seasonal_order, trend) as the fit takes it (not checked against the series)."""
    p, d, q = data["order"]
    P, D, Q, s = data["seasonal_order"] or (0, 0, 0, 0)
    trend = data["trend"] or ("constant" if d + D == 0 else "none")
    order = Order(p, d, q, P, D, Q, s, TRENDS[trend])
    return order if order.seasonal or not s else order.neighbour(s=0)


def explicit_order(data: dict, series: PreparedSeries) -> Order:
    """The order sent, checked against the series."""
    s = (data["seasonal_order"] or (0, 0, 0, 0))[3]
    if s and s >= series.length:
        raise invalid("/seasonal_order/3", f"The seasonal period s ({s}) must be less than the number of values "
                                           f"({series.length}).")
    return order_sent(data)


def check_size(order: Order, n: int, length: int, pointer: str) -> None:
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


def _fit_explicit(y: np.ndarray, order: Order, fits: Callable | None) -> Fitted:
    try:
        fitted = fit(y, order)
    except FitError as err:
        raise invalid("/order", f"{order.label()} could not be fitted: {err}.") from None
    finally:
        _count(fits, 1)
    if not fitted.converged:
        raise invalid("/order", f"The fit of {order.label()} did not converge within statsmodels' iteration limit "
                                f"(log-likelihood reached {fitted.loglik:.6g}); its estimates are not reliable. Try a "
                                'smaller order, or order "suggested".')
    return fitted


def _fit_suggested(y: np.ndarray, series: PreparedSeries, confidence: float, fits: Callable | None):
    start = start_order(y, series.period, confidence)
    check_size(start, series.n, series.length, "/order")
    found = search(y, start, series.period, options.MODEL_SEARCH_FITS, options.MODEL_WORK_BUDGET)
    _count(fits, len(found.tried))
    if found.best is None:
        failures = "; ".join(f"{t.order.label()}: {t.failure or 'did not converge'}" for t in found.tried)
        raise invalid("/order", f"No order of the search could be fitted and converge ({failures}); send an "
                                "explicit order.")
    return found.best.fitted, found


def _residual_series(series: PreparedSeries, fitted: Fitted, limits) -> PreparedSeries:
    values = fitted.residuals
    period = series.period if series.period is not None and series.period < values.size else None
    fields = {"values": values, "timestamps": None, "period": period, "name": series.name, "transform": None,
              "missing": "pairwise" if np.isnan(values).any() else "refuse"}
    try:
        out = prepare(fields, limits["MAX_POINTS"])
    except Problem as problem:
        detail = f"The residuals of {fitted.order.label()} cannot be diagnosed: {problem.detail}"
        raise invalid("/order", detail) from None
    out.period_source = series.period_source if period is not None else None
    out.frequency = series.frequency
    out.labels = series.labels[fitted.burn:] if series.labels is not None else None
    return out


def _residual_plan(resid: PreparedSeries, data: dict, arma_terms: int, limits):
    try:
        return plan_for(resid, {**data, "model_df": arma_terms}, limits)
    except Problem as problem:
        problem.errors = [FieldError("/order" if e.pointer == "/model_df" else e.pointer, e.detail)
                          for e in problem.errors]
        raise


def model_check(data: dict, limits, observe: Callable | None = None, fits: Callable | None = None,
                checkpoint: Callable | None = None) -> dict:
    """Fit the model, diagnose its residuals and compare them with the series: the answer of /v1/model-check."""
    series = prepare(data, limits["MAX_POINTS"])
    before_plan = plan_for(series, {**data, "model_df": 0}, limits)
    y = series.values
    if data["order"] == options.MODEL_SUGGESTED:
        fitted, found = _fit_suggested(y, series, data["confidence"], fits)
    else:
        order = explicit_order(data, series)
        check_size(order, series.n, series.length, "/order")
        fitted, found = _fit_explicit(y, order, fits), None
    resid = _residual_series(series, fitted, limits)
    after_plan = _residual_plan(resid, data, fitted.order.arma_terms, limits)
    _count(checkpoint, 0, 2)
    before, after = run([(series, before_plan), (resid, after_plan)], observe=observe,
                        charts=True)  # the residuals' report keeps its chart data (the time plot of the fit)
    return model_outputs.answer(series.name, fitted, found, after, before, options.MODEL_SEARCH_FITS,
                                options.MODEL_WORK_BUDGET)


# --- driver check -------------------------------------------------------------------------------------------

def driver_lags(requested: int | None, n: int, index: int) -> int:
    """Cross-correlation lags K: min(DRIVER_DEFAULT_LAG, n // 5), or max_lag when sent (at most n // 4)."""
    if requested is None:
        return max(1, min(options.DRIVER_DEFAULT_LAG, n // 5))
    if requested > n // 4:
        raise invalid("/max_lag", f"max_lag must be at most a quarter of the values the series shares with "
                                  f"/drivers/{index} ({n // 4} of {n}), got {requested}.")
    return requested


def driver_check(data: dict, limits, observe: Callable | None = None, checkpoint: Callable | None = None) -> dict:
    """Prewhiten each driver, cross-correlate it with the series and judge the link: the answer of
    /v1/driver-check."""
    if data["missing"] == "pairwise":
        raise invalid("/missing", 'The driver check needs complete series: use missing "interpolate" (or "refuse").')
    series = prepare(data, limits["MAX_POINTS"])
    blocks = []
    for i, driver in enumerate(data["drivers"]):
        _count(checkpoint, i, len(data["drivers"]))
        prepared = prepare_driver(driver, data, i, limits["MAX_POINTS"])
        y, x, labels = line_up(series, prepared, i)
        if y.size < options.DRIVER_MIN_POINTS:
            raise invalid(f"/drivers/{i}/values", f"The driver and the series share {y.size} values; at least "
                                                  f"{options.DRIVER_MIN_POINTS} are needed.")
        if np.ptp(x) == 0 or np.ptp(y) == 0:
            raise invalid(f"/drivers/{i}/values", "The driver or the series is constant where they overlap.")
        found = check(y, x, driver_lags(data["max_lag"], y.size, i), min(options.DRIVER_MAX_AR_ORDER, y.size // 10))
        _count(observe, 2, 2 * int(y.size))
        blocks.append(driver_outputs.driver_block(driver["name"], int(y.size), labels, found, data["confidence"]))
    return driver_outputs.answer(series.name, series.n, data["confidence"], blocks)


# --- stability ----------------------------------------------------------------------------------------------

def stability_windows(data: dict, length: int, limits) -> tuple[int, list[int]]:
    """The step and the windows' starts, checked against the series and the limits."""
    width = data["window"]
    if width > length:
        raise invalid("/window", f"window ({width}) must be at most the number of values ({length}).")
    step = data["step"] or max(1, width // 2)
    if step > width:
        raise invalid("/step", f"step ({step}) must be at most the window ({width}), or values would go unchecked.")
    if data["max_lag"] is not None and data["max_lag"] >= width:
        raise invalid("/max_lag", f"max_lag must be less than the window ({width}), got {data['max_lag']}.")
    starts = window_starts(length, width, step)
    most = min(options.STABILITY_MAX_WINDOWS, limits["MAX_SERIES"], limits["MAX_BATCH_POINTS"] // width)
    if len(starts) > most:
        raise invalid("/step", f"{len(starts)} windows of {width} values are more than the {most} one request may "
                               f"diagnose; raise step to at least {-(-(length - width) // (most - 1))}.")
    return step, starts


def _window(series: PreparedSeries, start: int, width: int, method: str, limits) -> PreparedSeries:
    values = series.values[start:start + width]
    period = series.period if series.period is not None and series.period < width else None
    return prepare({"values": values, "timestamps": None, "period": period, "name": None, "transform": None,
                    "missing": method if np.isnan(values).any() else "refuse"}, limits["MAX_POINTS"])


def stability(data: dict, limits, observe: Callable | None = None, checkpoint: Callable | None = None) -> dict:
    """Diagnose every window, then read the changes: the JSON answer of /v1/stability."""
    series = prepare(data, limits["MAX_POINTS"])
    step, starts = stability_windows(data, series.length, limits)
    width = data["window"]
    if data["p_values"] == "monte_carlo" and data["seed"] is None:
        data["seed"] = secrets.randbits(63)  # one seed for every window: equal windows share one simulated null
    items, errors = [], {}
    for i, start in enumerate(starts):
        try:
            window = _window(series, start, width, series.missing["method"], limits)
            items.append((i, window, plan_for(window, data, limits)))
        except Problem as problem:
            errors[i] = problem.detail
    reports: dict = {}
    passes = run_blocks([(w, p) for _, w, p in items], observe=observe)
    while True:
        _count(checkpoint, len(reports), len(items))
        block = next(passes, None)
        if block is None:
            break
        reports.update((items[j][0], report) for j, report in block)
    labels = series.labels
    windows = [stability_outputs.window_entry(i, start, width, series.values[start:start + width], labels,
                                              reports.get(i), errors.get(i)) for i, start in enumerate(starts)]
    alpha = 1.0 - data["confidence"]
    if series.length // width >= MIN_BLOCKS:
        stats, found = find_changes(series.values, width, alpha)
    else:
        stats, found = None, []
    changes = stability_outputs.change_block(stats, found, width, series.length, labels, alpha)
    return stability_outputs.answer(series.name, series.n, width, step, data["confidence"], windows, changes, labels)

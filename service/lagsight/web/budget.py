"""Bounded work: a request's cost estimated before the engine starts, and the request deadline.

Cost
----
Size limits (bytes, points, series) bound memory, not work: a batch of many series with distinct
lengths and a long period costs one seasonal decomposition per length. Each request's work is
estimated in cost units, about a millisecond of one core of the benchmark machine (BENCHMARKS.md),
by a linear model of what the service does, with coefficients measured there
(``python -m benchmarks.cost_model`` prints the estimate beside the measured time for a range of
requests):

- every engine pass (series of one length and options are analysed together; large groups are cut
  into blocks, see ``pipeline.blocks``): a fixed cost and a cost per lag; small blocks run together in
  chunks (``pipeline.chunks``), whose partial autocorrelations (for the full report) are one recursion per
  number of lags;
- every series: a fixed cost, a cost per point (reading, checks, the engine, the answer) and per
  squared lag (partial autocorrelations, for the full report only), more for the full report than for the
  brief one;
- the seasonal decomposition (STL) of series with a period: per period its loess tables (which grow
  with the square of the trend window, about 1.9 x the period; shared by every length longer than
  the window, one per length otherwise), per chunk and period a joint decomposition, per block its
  own steps, and per series its application. It is counted as if every such series were decomposed:
  the engine decomposes only those with a seasonal lag outside the band, which is not known before
  the analysis, and a request that states a period usually has one;
- the mechanism checks (ADF regressions with and without a trend, KPSS, the trend slope): per
  complete series, by its length and the ADF's regressors. Counted for every series, as if each had
  the strong lag-one autocorrelation that calls for them;
- Monte Carlo p-values: replicates x (points + lags) per distinct length and options;
- Box-Cox lambda estimation: per series that asks for it, counted before the series are prepared.

The routes that follow a diagnosis (model check, driver check, stability) are estimated before any work
too: a model fit by its units of the fit's cost (about 12 microseconds a unit for small models, at most the
whole work budget's 18 s; the suggested order's search at its whole work budget), the prewhitening and
cross-correlation of each driver (per driver and per paired value), and every window of a stability request as
a series of the engine, plus the change reading per window.

Not counted: the unit-root check of the full report (for series whose autocorrelations decay
slowly, on at most 10,000 points each), whose cost depends on the data. The estimate is a model,
not a measurement: a busy machine is slower than the one it was measured on. A request over
``LAGSIGHT_MAX_COST`` is a 413 before any analysis, naming its cost, the budget and what to change.

Deadline
--------
Inside the budget, ``LAGSIGHT_REQUEST_DEADLINE`` (by default half the worker timeout) ends a
request that runs late: it is checked before each engine pass of a batch (and before the one pass
of a single series; before each driver of a driver check, the residuals' diagnosis of a model check and each
engine pass over the windows of a stability request, :func:`checkpoint`), so a late request answers a 503 problem, or, in an NDJSON stream whose status
line is already sent, one error line for each series not done, then the summary. What it cannot do:
interrupt an engine pass that has started (a single pass runs to its end), or a step outside the
engine (reading the body, preparing the series). Past the worker timeout gunicorn stops the worker;
the caller then gets a 503 too (``lagsight.serving.server_errors``). Each stop is logged with the
request id and counted in ``lagsight_requests_stopped_total``.
"""
from __future__ import annotations

import logging
import time
from collections import defaultdict
from dataclasses import dataclass, field

from flask import current_app, g

from lagsight import follow_up, options
from lagsight.engine import mechanism, stationarity, stl, whiteness
from lagsight.engine import trend as trend_mod
from lagsight.engine.arima import cost as fit_cost
from lagsight.inputs.stability import window_starts
from lagsight.pipeline import BLOCK_POINTS, Plan, blocks, chunks
from lagsight.problems import FieldError, Problem, counted
from lagsight.web import metrics
from lagsight.web.observability import request_id, route_label

log = logging.getLogger("lagsight")

#: Cost units (about a millisecond of one core of the benchmark machine) per item, measured by
#: benchmarks/cost_model.py on the 2-core benchmark machine (December 2026).
PASS = 0.9  # an engine pass
PASS_LAG = 0.013  # the partial autocorrelations' recursion, per lag, once per chunk and number of lags
PASS_LAG_BLOCK = 0.002  # an engine pass, per lag (the rest of a block's own pass)
SERIES = 0.02  # a series
POINT = 0.0006  # a point: reading, checks, engine and brief answer
SERIES_LAG2 = 2e-6  # a series, per squared lag (partial autocorrelations)
FULL_SERIES = 0.15  # the full report over the brief one, per series
FULL_POINT = 0.0003  # the full report over the brief one, per point
STL_TABLES = 1.2  # the loess tables of one period (and of each length its trend window covers): fixed
STL_TABLES_W2 = 4.5e-5  # ... per squared trend window
STL_CALL = 0.6  # decomposing the series of one chunk with one period: fixed
STL_CALL_W2 = 2.2e-6  # ... per squared trend window
STL_GROUP = 0.5  # ... per block in it (its own cycle-subseries, averages and transforms)
STL_SERIES_W2 = 1.3e-6  # decomposing one series: its ends, per squared trend window
STL_POINT = 3e-4  # ... per point (the middle fits of long windows by FFT: stl.FFT_MIN_WIDTH)
STL_POINT_W = 6.5e-7  # ... per point and trend window, for windows whose middle fits are direct sums
MECH_SERIES = 0.03  # the mechanism checks of one series (ADF with and without trend, KPSS, trend slope)
MECH_POINT = 4e-4  # ... per point
MECH_POINT_K2 = 9.2e-7  # ... per point (at most stationarity.ADF_MAX_POINTS) and squared ADF regressors
MC_VALUE = 8.5e-5  # a simulated value (replicates x points)
MC_LAG = 1.2e-4  # a replicate, per lag
NULL_VALUE = 3.5e-4  # a value simulated for the verdict's null table (4,000 x 400 values measured at about 0.56 s)
BOX_COX = 0.45  # estimating one series' Box-Cox lambda
BOX_COX_POINT = 2e-5  # ... per point
#: A unit of engine.arima.cost in one fit. Small models cost more per unit than the largest: ARIMA(2,0,1) on 1,000
#: values took 2.5 s (216,000 units) and (3,0,3) on 2,000 values 11.4 s (1,152,000 units) on a busy 2-core machine,
#: about 12 microseconds a unit, while fits of about 15,000,000 units took 16-18 s (1.1-1.2 microseconds a unit,
#: options.MODEL_WORK_BUDGET). A fit is estimated at FIT_SMALL_UNIT a unit, at most FIT_UNIT x the work budget.
FIT_SMALL_UNIT = 0.012
FIT_UNIT = 1.2e-3
DRIVER = 10.0  # a driver of /v1/driver-check: AR order search, prewhitening, cross-correlation, Haugh's test
DRIVER_POINT = 0.5  # ... per paired value (measured on a busy machine: 13 ms at 200 values, 0.2 s at 1,000, 1.1 s at 2,000-4,000)
WINDOW = 0.45  # a window of /v1/stability beyond the engine's series: its entry and the change reading

#: What to change when a part dominates, said in the answer.
_ADVICE = {
    "seasonal decompositions": "send fewer distinct series lengths with a period (for example trim the series to "
                               "a few common lengths), split the batch, or use a shorter period",
    "engine passes": "send fewer distinct series lengths and options, or split the batch",
    "mechanism checks": "split the batch, or send shorter series",
    "series and points": "split the batch, or ask for detail \"brief\"",
    "lags": "ask for a lower max_lag",
    "Monte Carlo p-values": "use fewer replicates, fewer distinct series lengths, or asymptotic p-values",
    "Box-Cox estimates": "send a Box-Cox lambda instead of \"estimate\", or split the batch",
    "verdict null tables": "send fewer distinct max_lag values and periods (or a lower max_lag), or split the batch",
    "model fits": "send fewer values, a smaller (seasonal) order, or an explicit order instead of \"suggested\"",
    "drivers": "send fewer drivers or fewer values per request",
    "windows": "raise step or window (fewer windows), or send fewer values",
}


@dataclass
class Estimate:
    """A request's estimated work in cost units, by part."""

    parts: dict[str, float] = field(default_factory=lambda: defaultdict(float))
    notes: dict[str, str] = field(default_factory=dict)

    @property
    def total(self) -> float:
        return sum(self.parts.values())

    def add(self, part: str, units: float) -> None:
        self.parts[part] += units


def box_cox_estimates(estimate: Estimate, count: int, points: int) -> Estimate:
    """Add ``count`` Box-Cox lambda estimates over ``points`` points in all."""
    if count:
        estimate.add("Box-Cox estimates", BOX_COX * count + BOX_COX_POINT * points)
        estimate.notes["Box-Cox estimates"] = counted(count, "lambda estimate", "lambda estimates")
    return estimate


def engine_work(estimate: Estimate, prepared: list, detail: str) -> Estimate:
    """Add the work of analysing ``prepared`` ((series, plan) pairs) and answering with ``detail``."""
    full = detail == "full"
    tables: set = set()
    decomposed: set[tuple[int, int]] = set()
    verdict_nulls: set = set()
    for chunk in chunks(blocks(prepared)):
        # One recursion for the partial autocorrelations of every block with the same lags, and one joint
        # decomposition per period (engine/family.py).
        for lags in {plan.spec.max_lag for plan, _ in chunk} if full else ():  # the brief answer reads none
            estimate.add("lags", PASS_LAG * lags)
        for period in {plan.spec.period for plan, _ in chunk if _decomposes(plan)}:
            estimate.add("seasonal decompositions", STL_CALL + STL_CALL_W2 * stl.windows(period)[0] ** 2)
        for plan, members in chunk:
            _block_work(estimate, plan, len(members), full, tables, decomposed, verdict_nulls)
    if decomposed:
        periods = sorted({p for _, p in decomposed})
        shown = ", ".join(f"{p:,}" for p in periods[:3]) + (" ..." if len(periods) > 3 else "")
        estimate.notes["seasonal decompositions"] = (counted(len(decomposed), "distinct pair", "distinct pairs")
                                                     + f" of series length and period to decompose (period {shown})")
    return estimate


def _block_work(estimate: Estimate, plan: Plan, rows: int, full: bool, tables: set, decomposed: set,
                verdict_nulls: set) -> None:
    """Add one block's work (its series within a chunk; see engine_work)."""
    lags, n = plan.spec.max_lag, max(plan.n, plan.length)
    estimate.add("engine passes", PASS)
    estimate.add("lags", PASS_LAG_BLOCK * lags + (SERIES_LAG2 * lags * lags * rows if full else 0.0))
    estimate.add("series and points", rows * (SERIES + POINT * n + (FULL_SERIES + FULL_POINT * n if full else 0)))
    if _decomposes(plan):
        trend = stl.windows(plan.spec.period)[0]
        w2 = trend ** 2
        decomposed.add((plan.n, plan.spec.period))
        # A loess table is kept per window, shared by every length the window is shorter than (engine/stl.py).
        key = plan.spec.period if trend < plan.n else (plan.n, plan.spec.period)
        if key not in tables:
            tables.add(key)
            estimate.add("seasonal decompositions", STL_TABLES + STL_TABLES_W2 * w2)
        fft = trend >= stl.FFT_MIN_WIDTH and (plan.n - trend) * trend >= stl.FFT_MIN_WORK
        per_point = STL_POINT if fft else STL_POINT + STL_POINT_W * trend
        estimate.add("seasonal decompositions", STL_GROUP + rows * (STL_SERIES_W2 * w2 + per_point * plan.n))
    if not plan.pairwise and plan.n >= mechanism.MIN_N:
        # Counted as if every series needed them: the engine runs them for series with a strong lag-one
        # autocorrelation, which is not known before the analysis.
        adf_n = min(plan.n, stationarity.ADF_MAX_POINTS)
        k = trend_mod.adf_trend_lags(adf_n) + 3
        estimate.add("mechanism checks", rows * (MECH_SERIES + MECH_POINT * plan.n + MECH_POINT_K2 * adf_n * k * k))
    if plan.spec.replicates:  # a Monte Carlo plan is one block: its null is simulated once
        estimate.add("Monte Carlo p-values", plan.spec.replicates * (MC_VALUE * plan.n + MC_LAG * lags))
    layout = plan.spec.layout  # keyed by the horizon too: each horizon has its own draws
    values = whiteness.table_cost(plan.n, layout)  # the verdict's null table, built once per process and kept
    key = whiteness.draw_key(plan.n, layout)
    if values and key not in verdict_nulls:  # tables of one key share their draws (whiteness.prepare_tables)
        verdict_nulls.add(key)
        # The first draws a request needs are warm-up work (at most whiteness.MAX_SIMULATED values, under a
        # second); every further set of draws for tables not built yet counts.
        if len(verdict_nulls) > 1:
            estimate.add("verdict null tables", NULL_VALUE * values)


def _decomposes(plan: Plan) -> bool:
    """Whether the engine may run STL on this plan's series (see engine.analysis.analyse)."""
    period = plan.spec.period
    return (period is not None and not plan.pairwise and plan.spec.seasonal_strength
            and plan.n >= 2 * period + 1 and stl.supports(period))


def check(estimate: Estimate, pointer: str) -> None:
    """413 when the estimate is over the deployment's budget, naming the cost, the budget and what to change."""
    budget = current_app.config["MAX_COST"]
    total = estimate.total
    if total <= budget:
        return
    top = max(estimate.parts, key=estimate.parts.get)
    note = estimate.notes.get(top)
    detail = (f"This request would cost about {total:,.0f} units of work, over this deployment's budget of "
              f"{budget:,} (LAGSIGHT_MAX_COST; a unit is about a millisecond of one core). Most of it is "
              f"{top} ({estimate.parts[top]:,.0f}{'; ' + note if note else ''}). Nothing was analysed; to fit, "
              f"{_ADVICE[top]}.")
    log.info("request over the cost budget", extra={"request_id": request_id(), "route": route_label(),
                                                   "cost": round(total), "budget": budget, "largest_part": top})
    raise Problem("payload-too-large", detail, [FieldError(pointer, detail)])


def _series_work(estimate: Estimate, count: int, n: int, lags: int, part: str) -> None:
    """``count`` full reports of n points and ``lags`` lags, in engine passes of at most BLOCK_POINTS values."""
    passes = -(-count * n // BLOCK_POINTS) if count else 0
    estimate.add(part, passes * (PASS + PASS_LAG * lags) + count * (
        SERIES + FULL_SERIES + (POINT + FULL_POINT) * n + SERIES_LAG2 * lags * lags))


def check_model_check(data: dict, cfg) -> None:
    """413 when a model check's estimated work is over the budget: its fits at their worst and the two reports."""
    estimate = Estimate()
    n = int(data["values"].size)
    if n < 2:
        return  # too few values for any model: the route refuses it with a 422 of its own
    if data["order"] == options.MODEL_SUGGESTED:
        estimate.add("model fits", FIT_UNIT * options.MODEL_WORK_BUDGET)
        estimate.notes["model fits"] = (f"the suggested order's search may spend its whole work budget of "
                                        f"{options.MODEL_WORK_BUDGET:,} units")
    else:
        order = follow_up.order_sent(data)
        units = fit_cost(order, n)
        if units > options.MODEL_WORK_BUDGET:
            return  # the route refuses it with a 422 of its own (the model's work budget), naming the order
        estimate.add("model fits", min(FIT_SMALL_UNIT * units, FIT_UNIT * options.MODEL_WORK_BUDGET))
        estimate.notes["model fits"] = f"one fit of {order.label()} to {n:,} values at its iteration limit"
    _series_work(estimate, 2, n, data["max_lag"] or options.default_max_lag(n, data["period"]), "series and points")
    check(estimate, "/order")


def check_driver_check(data: dict, cfg) -> None:
    """413 when a driver check's estimated work is over the budget."""
    estimate = Estimate()
    n = int(data["values"].size)
    count = len(data["drivers"])
    estimate.add("drivers", sum(DRIVER + DRIVER_POINT * min(n, d["values"].size) for d in data["drivers"]))
    estimate.notes["drivers"] = counted(count, "driver", "drivers") + f" against {n:,} values"
    check(estimate, "/drivers")


def check_stability(data: dict, cfg) -> None:
    """413 when a stability request's estimated work is over the budget (windows that do not fit the series are
    left to the route's own checks)."""
    n, width = int(data["values"].size), data["window"]
    step = data["step"] or max(1, width // 2)
    if not width <= n or step > width:
        return
    count = len(window_starts(n, width, step))
    estimate = Estimate()
    lags = data["max_lag"] or options.default_max_lag(width, data["period"])
    _series_work(estimate, count, width, lags, "windows")
    estimate.add("windows", WINDOW * count)
    if data["p_values"] == "monte_carlo":
        estimate.add("Monte Carlo p-values", data["replicates"] * (MC_VALUE * width + MC_LAG * lags))
    estimate.notes["windows"] = counted(count, "window", "windows") + f" of {width:,} values"
    check(estimate, "/window")


def checkpoint(unit: str, advice: str):
    """The ``checkpoint(done, total)`` a route that follows a diagnosis calls before each remaining piece of work:
    a 503 problem once the request is past its deadline and work remains."""
    def stop_if_late(done: int, total: int) -> None:
        if done < total and deadline_passed():
            raise late(done, total, unit, advice)
    return stop_if_late


def deadline_passed() -> bool:
    """Whether this request has run past LAGSIGHT_REQUEST_DEADLINE (counted from its start)."""
    started = g.get("started")
    return started is not None and time.perf_counter() - started > current_app.config["REQUEST_DEADLINE"]


def late(done: int, total: int, unit: str = "series",
         advice: str = "Send fewer series per request, or ask for NDJSON (application/x-ndjson) to receive results as "
                       "they finish.") -> Problem:
    """Log and count a request stopped at its deadline, and the problem that says so (503)."""
    seconds = current_app.config["REQUEST_DEADLINE"]
    log.warning("request stopped at its deadline", extra={
        "request_id": request_id(), "route": route_label(), "deadline_s": seconds,
        "elapsed_s": round(time.perf_counter() - g.get("started", time.perf_counter()), 3),
        "series_done": done, "series_not_done": total - done})
    metrics.record_stopped("deadline")
    return Problem("unavailable", f"The request reached this deployment's deadline of {seconds:g} s "
                                  f"(LAGSIGHT_REQUEST_DEADLINE) with {total - done:,} of {total:,} {unit} not "
                                  f"analysed. {advice}")

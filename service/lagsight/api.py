"""Lagsight in Python: what the HTTP answers hold, without a server.

>>> import lagsight
>>> report = lagsight.diagnose([3.1, 2.7, 3.4, 2.9, 3.3, 2.8, 3.0, 3.5, 2.6, 3.2], max_lag=4)
>>> report["verdict"]["white_noise"] in (True, False)
True

- :func:`diagnose`: one series -> the report of ``POST /v1/diagnostics`` (JSON answer) as a dict.
- :func:`diagnose_many`: a long table of many series -> one row of results per series (a pandas
  DataFrame, :data:`lagsight.tables.TABLE`); with ``reports=True`` also the answer of ``POST /v1/diagnostics/batch``.
- :func:`model_check`, :func:`driver_check`, :func:`stability`: the answers of ``POST /v1/model-check``,
  ``/v1/driver-check`` and ``/v1/stability`` (JSON) as dicts, from the same functions (:mod:`lagsight.follow_up`).
- :class:`LagsightError`: raised where the service answers with an error; it carries the same problem
  details (status, type, title, detail, errors with JSON pointers into the equivalent request body).

Options are the request's fields, by the same names, with the same defaults and checks (:mod:`lagsight.options`).
The checks and the analysis are the service's own functions (:mod:`lagsight.handling`, :mod:`lagsight.pipeline`).
What only protects a shared server does not apply in process: the request body size, the number of series and of
values per batch request, the cost budget and the request deadline. The limits that concern a series (its points,
lags, Monte Carlo replicates and simulated values) are the service's defaults (:data:`LIMITS`); ``limits={...}``
changes them as a deployment's settings do.

As in the service: a verdict of white noise is not proof of white noise, only that the sample gives no strong
evidence of autocorrelation at the lags checked; bands and asymptotic p-values are approximate for short series;
among many series some are flagged by chance alone, which the false-discovery q-values take into account.
"""
from __future__ import annotations

from collections.abc import Mapping

import pandas as pd

from lagsight import follow_up, handling, options, tables
from lagsight.consult import across
from lagsight.outputs.shared import hoist
from lagsight.pipeline import gc_paused, run_blocks
from lagsight.problems import KINDS, TYPE_PREFIX, Problem

#: The limits that concern a series or a batch's analysis, as the service's defaults (settings names).
LIMITS = {key.upper(): options.DEFAULT_LIMITS[key] for key in ("max_points", "max_lag", "max_replicates",
                                                              "max_simulated_values")}
#: The limits of the routes that follow a diagnosis: :data:`LIMITS` and the batch limits that bound a stability
#: request's windows (and a driver check's values), as the service's defaults.
ROUTE_LIMITS = {**LIMITS, **{key.upper(): options.DEFAULT_LIMITS[key] for key in ("max_series", "max_batch_points")}}
#: Series prepared and analysed at a time: at most one default batch request's worth.
CHUNK = options.DEFAULT_LIMITS["max_series"]


class LagsightError(Problem):
    """The error the service would answer, as an exception: RFC 9457 problem details.

    ``status`` (the HTTP status), ``kind`` (the slug of ``type``), ``type``, ``title``, ``detail`` and
    ``errors`` (each with a JSON ``pointer`` into the equivalent request body and its ``detail``);
    ``as_dict()`` gives the problem+json body (``instance`` None: there is no request).
    """

    @classmethod
    def of(cls, problem: Problem) -> LagsightError:
        return cls(problem.kind, problem.detail, list(problem.errors), dict(problem.headers))

    @property
    def type(self) -> str:
        return TYPE_PREFIX + self.kind

    @property
    def title(self) -> str:
        return KINDS[self.kind][1]

    def __reduce__(self):  # an exception pickles its args: keep every field (Dask sends errors between processes)
        return type(self), (self.kind, self.detail, self.errors, self.headers)

    def __str__(self) -> str:
        fields = "".join(f"\n  {e.pointer or '/'}: {e.detail}" for e in self.errors)
        return f"{self.status} {self.title}: {self.detail}{fields}"


def limits_with(limits: Mapping | None, known: Mapping = LIMITS) -> dict:
    """``known`` (:data:`LIMITS`) with the given ones (settings names) in their place."""
    out = dict(known)
    for key, value in (limits or {}).items():
        if key.upper() not in known:
            raise TypeError(f"unknown limit {key!r}; the limits are {', '.join(known)}")
        out[key.upper()] = value
    return out


def series_body(values, options_: Mapping) -> dict:
    """The request body of one series: ``values`` as a list, with a pandas Series' stamps and name."""
    body = {"values": tables.value_list(values), **options_}
    if isinstance(values, pd.Series):
        index = values.index.to_timestamp() if isinstance(values.index, pd.PeriodIndex) else values.index
        if isinstance(index, pd.DatetimeIndex):
            if "timestamps" in options_:
                raise TypeError("timestamps come from the Series' DatetimeIndex; do not give them twice")
            body["timestamps"] = tables.iso_labels(index).tolist()
        if "name" not in options_ and isinstance(values.name, str):
            body["name"] = values.name
    return body


def _follow_up(run_route, schema, body: dict, limits: Mapping | None) -> dict:
    cfg = limits_with(limits, ROUTE_LIMITS)
    try:
        return run_route(handling.load(schema, body), cfg)
    except Problem as problem:
        raise LagsightError.of(problem) from None


def model_check(values, /, *, order, limits: Mapping | None = None, **options_) -> dict:
    """Fit a seasonal ARIMA model and diagnose its residuals: the answer of ``POST /v1/model-check`` as a dict.

    ``values`` as for :func:`diagnose`; ``order`` is [p, d, q] or "suggested"; the other fields of the request
    (``seasonal_order``, ``trend``, ``timestamps``, ``period``, ``missing``, ``transform``, ``max_lag``,
    ``confidence``, ...) as keyword arguments. ``limits`` as for :func:`diagnose`, plus MAX_SERIES and
    MAX_BATCH_POINTS (:data:`ROUTE_LIMITS`). Raises :class:`LagsightError` where the route answers an error (a 422
    for a model that does not converge, a series too short for the order, ...).
    """
    return _follow_up(follow_up.model_check, follow_up.MODEL_CHECK, {**series_body(values, options_), "order": order},
                      limits)


def driver_check(values, /, *, drivers, limits: Mapping | None = None, **options_) -> dict:
    """Does a candidate driver still move with the series: the answer of ``POST /v1/driver-check`` as a dict.

    ``drivers`` is a list of ``{"name", "values", "timestamps"?}`` (values as a list, array or pandas Series; a
    Series with a DatetimeIndex gives its stamps), or a mapping of name to values. Other fields and ``limits`` as
    for :func:`model_check`; raises :class:`LagsightError` where the route answers an error (a driver that shares
    too few values with the series, ...).
    """
    if isinstance(drivers, Mapping):
        drivers = [{"name": name, "values": v} for name, v in drivers.items()]
    sent = []
    for driver in drivers:
        if isinstance(driver, Mapping) and "values" in driver:
            sent.append(series_body(driver["values"], {k: v for k, v in driver.items() if k != "values"}))
        else:
            sent.append(driver)  # left to the route's checks (it answers where a driver is not an object)
    return _follow_up(follow_up.driver_check, follow_up.DRIVER_CHECK,
                      {**series_body(values, options_), "drivers": sent}, limits)


def stability(values, /, *, window: int, limits: Mapping | None = None, **options_) -> dict:
    """Diagnose the series window by window and read when it changed: the JSON answer of ``POST /v1/stability``.

    ``window`` (and ``step``, ...) as in the request; other fields and ``limits`` as for :func:`model_check`.
    Raises :class:`LagsightError` where the route answers an error (a window larger than the series, ...).
    """
    return _follow_up(follow_up.stability, follow_up.STABILITY, {**series_body(values, options_), "window": window},
                      limits)


def diagnose(values, /, *, limits: Mapping | None = None, **options_) -> dict:
    """Diagnose one series: the report that ``POST /v1/diagnostics`` answers in JSON, as a dict.

    Parameters
    ----------
    values : list, tuple, numpy.ndarray or pandas.Series
        The series in time order; NaN, None or pandas.NA mark a missing value (see the ``missing`` option).
        A pandas Series with a DatetimeIndex (or PeriodIndex) gives its stamps as ``timestamps`` (ISO 8601 text,
        see :func:`lagsight.tables.iso_labels`), and its name as ``name`` when it is text and no name is given.
    limits : mapping, optional
        Settings names (MAX_POINTS, MAX_LAG, MAX_REPLICATES, MAX_SIMULATED_VALUES) over :data:`LIMITS`.
    **options_
        The request's fields: ``timestamps``, ``period``, ``name``, ``missing``, ``transform``, ``max_lag``,
        ``confidence``, ``model_df``, ``horizon``, ``band``, ``tests``, ``p_values``, ``replicates``, ``seed``, and
        what is written: ``detail`` ("full" or "brief"), ``digits`` (significant digits, None for full precision) and
        ``charts`` (GET /v1/methods and openapi/openapi.yaml describe them).

    Raises
    ------
    LagsightError
        Where the service answers with an error (a 422 with a pointer per bad field, ...).
    """
    body = series_body(values, options_)
    cfg = limits_with(limits)
    try:
        data = handling.load(handling.SINGLE_LOAD, body)
        del body
        series, plan = handling.ready(data, cfg)
        return handling.single_answer(series, plan, data)
    except Problem as problem:
        raise LagsightError.of(problem) from None


def batch_options(count: int, options_: dict, limits: dict) -> dict:
    """The shared options of a batch of ``count`` series, checked as the batch route checks them."""
    if "series" in options_:
        raise TypeError("the series come from the frame; 'series' is not an option here")
    shared = handling.batch_options({"series": [None] * min(count, 1), **options_}, limits)
    shared.pop("series")
    return shared


def analyse_long(long: tables.LongFrame, shared: dict, limits: dict, reports: bool = False):
    """Every series of ``long`` through the batch route's steps, ``CHUNK`` series at a time.

    Returns the table rows (request order), the answer's results (request order; None unless ``reports``),
    the batch's summary (counts and the false-discovery reading of :mod:`lagsight.consult.across`) and, with
    ``detail`` "brief", the cautions and pointer that a brief answer carries once (else an empty dict).
    """
    total = len(long)
    rows: list = [None] * total
    results: list | None = [None] * total if reports else None
    tally = across.Tally(total, 1.0 - shared["confidence"])
    notes = {"count": 0, "alpha_sum": 0, "unfitted": False, "horizons": set()}
    detail = shared["detail"]
    for first in range(0, total, CHUNK):
        with gc_paused():
            prepared, where, errors = handling.prepare_items(long.items(first, min(first + CHUNK, total)), shared,
                                                             limits, start=first)
            handling.check_simulation(prepared, limits)
            if detail == "brief":
                for _, plan in prepared:
                    notes["count"] += 1
                    notes["alpha_sum"] += 1.0 - plan.spec.confidence
                    notes["unfitted"] = notes["unfitted"] or plan.spec.model_df == 0
                    notes["horizons"].add(plan.spec.horizon)
            for block in run_blocks(prepared, detail, digits=shared["digits"], charts=shared["charts"]):
                for j, report in block:
                    i, item_id = where[j]
                    result = {"id": item_id, **report}
                    rows[i] = tables.result_row(result)
                    verdict = result["verdict"]
                    tally.add({"id": item_id, "verdict": {"white_noise": verdict["white_noise"],
                                                          "tail_p_value": verdict["tail_p_value"]}},
                              i, 1.0 - prepared[j][1].spec.confidence)
                    if reports:
                        results[i] = result
            for i, result in errors:
                rows[i] = tables.result_row(result)
                tally.add(result)
                if reports:
                    results[i] = result
    extras = handling.brief_notes(notes["count"], notes["alpha_sum"], notes["unfitted"],
                                  horizons=notes["horizons"]) if detail == "brief" else {}
    return rows, results, tally.across(), extras


def diagnose_many(frame: pd.DataFrame, id: str = "id", time: str | None = "time", value: str = "value", *,
                  reports: bool = False, limits: Mapping | None = None, **options_):
    """Diagnose every series of a long table: one row of results per series.

    Parameters
    ----------
    frame : pandas.DataFrame
        One row per observation: the series' id (text or integer, as a batch item's ``id``), its time and its
        value (NaN or NA where missing). Series come in the order of each id's first row.
    id, value : str
        The columns holding each row's series id and value.
    time : str or None
        The column that orders each series' rows: a date-time column also gives the series' ``timestamps``
        (ISO 8601 text, so that its spacing, gaps and seasonal period are read as the service reads them); a
        number column only orders; a text column is sent as ``timestamps`` as given (rows in frame order).
        None: the frame's row order, no timestamps.
    reports : bool
        False (the default): the table alone. True: ``(table, answer)``, where ``answer`` is the dict that
        ``POST /v1/diagnostics/batch`` answers in JSON for the same series and options (``results`` with each
        series' full or brief report, ``summary`` with ``false_discovery``), keeping every report in memory.
    limits : mapping, optional
        As for :func:`diagnose`.
    **options_
        The batch request's shared options: ``detail`` ("full", the default, or "brief": faster, without the
        advice column), ``period``, ``missing``, ``transform``, ``max_lag``, ``confidence``, ``model_df``, ``horizon``,
        ``band``, ``tests``, ``p_values``, ``replicates``, ``seed``, ``digits``, ``charts``.

    Returns
    -------
    pandas.DataFrame
        The columns of :data:`lagsight.tables.TABLE`. A series that cannot be analysed has its ``error`` and
        nothing else; the ``q_value`` column is the batch's ``summary.false_discovery.q_values``: Benjamini-Hochberg
        adjusted ``tail_p_value`` across every series analysed (about ``1 - confidence`` of pure-noise series are
        called not white noise one by one; a q-value at most that rate stands out after the adjustment).

    Raises
    ------
    LagsightError
        When the batch as a whole is refused (an invalid shared option); a bad series is a row with an error.
    """
    cfg = limits_with(limits)
    long = tables.LongFrame(frame, id, time, value)
    try:
        shared = batch_options(len(long), options_, cfg)
        rows, results, summary, notes = analyse_long(long, shared, cfg, reports)
    except Problem as problem:
        raise LagsightError.of(problem) from None
    out = tables.table(rows, summary["false_discovery"]["q_values"], long.id_dtype)
    if not reports:
        return out
    if shared["detail"] == "brief":
        return out, {"detail": shared["detail"], "results": results, "summary": summary, **notes}
    return out, {"shared": hoist(results), "results": results, "summary": summary}

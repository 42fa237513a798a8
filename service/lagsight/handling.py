"""What both diagnosis routes do with a request's content, without HTTP: options loaded, series prepared and planned.

The views of :mod:`lagsight.web` and the Python API (:mod:`lagsight.api`) call these functions, so a body
(or the same values and options given in Python) is checked, cleaned and planned one way, with one set of
errors (:class:`~lagsight.problems.Problem`, pointers into the request body). What stays in the views is
HTTP's own: reading and negotiating the body, the request's size limits, its cost budget and deadline.

- One series: :func:`load` with :data:`SINGLE_LOAD`, then :func:`ready` (prepare, then plan), then
  :func:`lagsight.pipeline.run`.
- A batch: :func:`batch_options` (the shared options), :func:`prepare_items` (every item validated,
  cleaned and planned, a bad one becoming its error result), :func:`check_simulation`, then
  :func:`lagsight.pipeline.run_blocks`. ``web/batch.py`` imports these same functions.

``limits`` is a mapping with the deployment limits that concern one series or one batch's analysis:
MAX_POINTS, MAX_LAG, MAX_REPLICATES and MAX_SIMULATED_VALUES (the app's config, or
:data:`lagsight.api.LIMITS`).
"""
from __future__ import annotations

import secrets

from marshmallow import Schema, ValidationError

from lagsight.consult import cautions as cautions_mod
from lagsight.inputs import batch_items
from lagsight.inputs.schema import (
    BATCH_OVERRIDES,
    DIRECT_CHECKS,
    DIRECT_FIELDS,
    SERIES_OVERRIDES,
    BatchRequest,
    BatchSeries,
    DiagnosticsRequest,
    DirectLoad,
)
from lagsight.inputs.series import PreparedSeries, prepare
from lagsight.outputs import brief
from lagsight.pipeline import Plan, plan_for, run
from lagsight.problems import FieldError, Problem, counted, flatten_messages

#: The single request's body, loaded field by field when its fields are plain (see schema.DirectLoad).
SINGLE_LOAD = DirectLoad(DiagnosticsRequest(), DIRECT_FIELDS, DIRECT_CHECKS)
#: The batch request's shared options (its items are checked one by one).
BATCH_REQUEST = BatchRequest()
#: A series of plain fields (no schema-level checks) is loaded field by field (see schema.DirectLoad):
#: marshmallow's full load costs about 0.1 ms per series, most of a 10,000-series batch's validation.
ITEM_LOAD = DirectLoad(BatchSeries(), ("id", "values", "timestamps", "name", "period", "max_lag", "confidence",
                                       "model_df", "horizon"), DIRECT_CHECKS)


def load(schema: Schema | DirectLoad, body: dict) -> dict:
    """Validate a parsed body; a failure becomes a 422 with a pointer per bad field."""
    try:
        return schema.load(body)
    except ValidationError as err:
        errors = flatten_messages(err.messages)
        raise Problem("invalid-content", f"{counted(len(errors), 'field is', 'fields are')} invalid; see errors.",
                      errors) from None


def ready(data: dict, limits) -> tuple[PreparedSeries, Plan]:
    """One loaded series cleaned (series.prepare) and planned (pipeline.plan_for)."""
    series = prepare(data, limits["MAX_POINTS"])
    return series, plan_for(series, data, limits)


def check_shared(shared: dict, limits) -> None:
    """422 when the batch's shared max_lag is over the deployment's limit."""
    if shared["max_lag"] is not None and shared["max_lag"] > limits["MAX_LAG"]:
        raise Problem("invalid-content", "1 field is invalid; see errors.", [FieldError(
            "/max_lag", f"max_lag must be at most {limits['MAX_LAG']} (this deployment's limit), got {shared['max_lag']}.")])


def batch_options(body: dict, limits) -> dict:
    """The shared options of a batch body, loaded and checked, with ``series`` still in it.

    With Monte Carlo p-values and no seed, one seed is drawn for the whole batch (reported in every
    result), so that series of equal length share one simulated null instead of one simulation each.
    """
    shared = load(BATCH_REQUEST, body)
    check_shared(shared, limits)
    if shared.get("p_values") == "monte_carlo" and shared.get("seed") is None:
        shared["seed"] = secrets.randbits(63)
    return shared


def item_id(item):
    """The id of a batch item when it is a usable one (a string or an integer), else None."""
    value = item.get("id") if isinstance(item, dict) else None
    return value if isinstance(value, (str, int)) and not isinstance(value, bool) else None


def error_result(item, problem: Problem, instance: str | None) -> dict:
    """A batch item's result when it could not be analysed."""
    return {"id": item, "error": problem.as_dict(instance)}


def prepare_item(item, shared: dict, limits, seen: dict, index: int, axes: dict | None = None,
                 ) -> tuple[PreparedSeries, Plan]:
    """Validate, clean and plan one series; raise a Problem whose pointers start at the body's root
    (under ``/series/<index>``, or at the shared option when a shared value does not fit this series)."""
    prefix = f"/series/{index}"
    if not isinstance(item, dict):
        raise Problem("invalid-content", "The series is not a JSON object.",
                      [FieldError(prefix, "Must be an object with id and values.")])
    try:
        data = ITEM_LOAD.load(item)
    except ValidationError as err:
        errors = [e.under(prefix) for e in flatten_messages(err.messages)]
        said = "1 field of this series is" if len(errors) == 1 else f"{len(errors)} fields of this series are"
        raise Problem("invalid-content", f"{said} invalid; see errors.", errors) from None
    if data["id"] in seen:
        detail = f"The id {data['id']!r} is already used by /series/{seen[data['id']]}; ids must be unique."
        raise Problem("invalid-content", detail, [FieldError(prefix + "/id", detail)])
    seen[data["id"]] = index
    own = {key for key in BATCH_OVERRIDES if key in data}
    opts = {**shared, **{key: data[key] for key in own}}
    for key in SERIES_OVERRIDES:  # the series' own fields, as series.prepare reads them
        data[key] = opts[key]
    try:
        series = prepare(data, limits["MAX_POINTS"], axes)
        plan = plan_for(series, opts, limits)
    except Problem as problem:
        problem.errors = [  # a shared option that does not fit this series keeps its own (top-level) pointer
            e if _first_token(e.pointer) in shared and _first_token(e.pointer) not in own else e.under(prefix)
            for e in problem.errors
        ]
        raise
    return series, plan


def prepare_items(raw: list, shared: dict, limits, fast: bool = True, booleans: bool = True,
                  instance: str | None = None, start: int = 0):
    """Every item validated, cleaned and planned, in request order.

    Returns ``prepared`` ((series, plan) pairs), ``where`` (for each, its request index and id)
    and ``errors`` ((request index, error result) pairs). Plain items take the bulk path of
    :mod:`lagsight.inputs.batch_items` when ``fast`` is true; every other item, and any plain item that
    a bulk check refuses, takes the general path (:func:`prepare_item`), so both give the same
    answer. ``booleans`` false promises that the body holds no JSON boolean (see batch_items.bulk_values).
    ``instance`` goes into the error results' problem details. ``start`` is the request index of
    ``raw[0]`` when ``raw`` is one stretch of a longer list of series (indices and pointers count from it).
    """
    errors: list[tuple[int, dict]] = []
    prepared: list[tuple[PreparedSeries, Plan]] = []
    where: list[tuple[int, object]] = []  # prepared position -> (request index, id)
    seen: dict = {}
    rows: dict[int, object] = {}
    own: dict[int, dict] = {}
    if fast:
        groups, own = batch_items.candidates(raw, shared, limits["MAX_POINTS"])
        for members in groups.values():
            x, usable = batch_items.bulk_values(raw, members, booleans)
            rows.update(zip(usable, x))
    plans: dict = {}
    axes: dict = {}  # timestamps -> time axis, shared by the series of this request that send the same stamps
    for i, item in enumerate(raw, start):
        row = rows.get(i - start)
        if row is not None:
            done = _prepare_plain(item, row, own.get(i - start), shared, limits, seen, plans, i)
            if done is not None:
                prepared.append(done)
                where.append((i, item["id"]))
                continue
        try:
            prepared.append(prepare_item(item, shared, limits, seen, i, axes))
            where.append((i, item_id(item)))
        except Problem as problem:
            errors.append((i, error_result(item_id(item), problem, instance)))
    return prepared, where, errors


def _prepare_plain(item: dict, row, own: dict | None, shared: dict, limits, seen: dict, plans: dict, index: int):
    """A plain item whose values passed the bulk checks, prepared and planned; None when something is left
    for the general path to answer (a repeated id, a period or option that does not fit the series)."""
    item_id = item["id"]
    if item_id in seen:
        return None
    opts = {**shared, **own} if own else shared
    period = opts["period"]
    n = row.size
    if period is not None and period >= n:
        return None
    series = batch_items.prepared(row, item.get("name"), period, opts["missing"])
    key = (n, period, opts["max_lag"], opts["confidence"], opts["model_df"], opts.get("horizon", 1))
    plan = plans.get(key)
    if plan is None:
        try:
            plan = plan_for(series, opts, limits)
        except Problem:
            return None
        plans[key] = plan
    seen[item_id] = index
    return series, plan


def _first_token(pointer: str) -> str | None:
    """The first reference token of a JSON pointer ("/max_lag/0" -> "max_lag"; "" -> None)."""
    return pointer.split("/")[1] if pointer.startswith("/") else None


def check_simulation(prepared: list[tuple[PreparedSeries, Plan]], limits) -> None:
    """422 before any simulation when the batch's Monte Carlo work, one null per distinct plan, exceeds
    MAX_SIMULATED_VALUES (replicates x n summed over the plans)."""
    plans = {plan for _, plan in prepared}
    total = sum(plan.spec.replicates * plan.n for plan in plans)
    if total > limits["MAX_SIMULATED_VALUES"]:
        detail = (f"Monte Carlo p-values for this batch need {total} simulated values (replicates x n over "
                  f"{sum(1 for p in plans if p.spec.replicates)} distinct series lengths and options), more than "
                  f"this deployment's limit of {limits['MAX_SIMULATED_VALUES']}; use fewer replicates, fewer distinct "
                  "lengths, or asymptotic p-values.")
        raise Problem("invalid-content", detail, [FieldError("/replicates", detail)])


def single_answer(series: PreparedSeries, plan: Plan, data: dict, observe=None) -> dict:
    """The JSON answer for one loaded, prepared and planned series: its full report, or with ``detail``
    "brief" its brief result with the general cautions and the pointer to the full report.
    ``data`` holds the loaded options ``detail``, ``digits`` and ``charts``."""
    detail = data["detail"]
    result = run([(series, plan)], observe, detail, data["digits"], data["charts"])[0]
    if detail != "brief":
        return result
    notes = brief_notes(1, 1.0 - plan.spec.confidence, plan.spec.model_df == 0, single=True,
                        horizons=(plan.spec.horizon,))
    return {"detail": detail, **result, **notes}


def brief_notes(count: int, alpha_sum: float, unfitted: bool, single: bool = False, horizons=()) -> dict:
    """The cautions and the pointer to the full report that a brief answer carries once: ``count`` series
    analysed, the sum of their alphas, and whether any was sent with model_df 0 (``single``: the answer of
    the single route, whose cautions leave out the count across series; ``horizons`` those of the series)."""
    return {"cautions": cautions_mod.batch_cautions(count, alpha_sum, unfitted, single, horizons),
            "full_report": brief.FULL_REPORT}

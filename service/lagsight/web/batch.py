"""POST /v1/diagnostics/batch: many series in one request, one result per series.

Each series is validated and prepared on its own: a bad one becomes an ``error``
result (problem details with pointers under ``/series/<i>``) and the others go on.
Series that share a plan are analysed together (see :mod:`lagsight.pipeline`).
With ``Accept: application/x-ndjson`` the results are streamed, one JSON object
per line, as each engine block finishes.
"""
from __future__ import annotations

import logging
import secrets

from flask import Blueprint, Response, current_app, request, stream_with_context
from marshmallow import ValidationError

from lagsight.consult import across
from lagsight.consult import cautions as cautions_mod
from lagsight.inputs import batch_items
from lagsight.inputs.schema import (
    BATCH_OVERRIDES,
    DIRECT_CHECKS,
    SERIES_OVERRIDES,
    BatchRequest,
    BatchSeries,
    DirectLoad,
)
from lagsight.inputs.series import PreparedSeries, prepare
from lagsight.outputs import brief
from lagsight.outputs.encode import dumps
from lagsight.pipeline import Plan, gc_paused, plan_for, run_blocks
from lagsight.problems import FieldError, Problem, flatten_messages
from lagsight.web import budget, metrics
from lagsight.web.diagnostics import load
from lagsight.web.observability import request_id, route_label
from lagsight.web.payload import read_body, read_json_object
from lagsight.web.responses import json_response

bp = Blueprint("batch", __name__)
log = logging.getLogger("lagsight")

JSON = "application/json"
NDJSON = "application/x-ndjson"
_REQUEST = BatchRequest()
_SERIES = BatchSeries()


def _negotiate() -> str:
    """JSON unless the caller prefers NDJSON; 406 when it accepts neither."""
    if not request.headers.get("Accept"):
        return JSON
    best = request.accept_mimetypes.best_match([JSON, NDJSON])
    if best is None:
        raise Problem("not-acceptable", f"This route answers {JSON} or {NDJSON} (streamed); "
                                        f"the Accept header allows neither.")
    return best


def _check_size(body: dict, cfg) -> None:
    """413 before any validation work when the batch exceeds the series or point limits."""
    series = body.get("series")
    if not isinstance(series, list):
        return
    if len(series) > cfg["MAX_SERIES"]:
        detail = f"Too many series: {len(series)} > this deployment's limit of {cfg['MAX_SERIES']} per batch."
        raise Problem("payload-too-large", detail, [FieldError("/series", detail)])
    total = sum(len(s["values"]) for s in series if isinstance(s, dict) and isinstance(s.get("values"), list))
    if total > cfg["MAX_BATCH_POINTS"]:
        detail = f"Too many values: {total} in all > this deployment's limit of {cfg['MAX_BATCH_POINTS']} per batch."
        raise Problem("payload-too-large", detail, [FieldError("/series", detail)])


def _check_shared(shared: dict, cfg) -> None:
    if shared["max_lag"] is not None and shared["max_lag"] > cfg["MAX_LAG"]:
        raise Problem("invalid-content", "1 field is invalid; see errors.", [FieldError(
            "/max_lag", f"max_lag must be at most {cfg['MAX_LAG']} (this deployment's limit), got {shared['max_lag']}.")])


def _item_id(item):
    value = item.get("id") if isinstance(item, dict) else None
    return value if isinstance(value, (str, int)) and not isinstance(value, bool) else None


#: A series of plain fields (no schema-level checks) is loaded field by field (see schema.DirectLoad):
#: marshmallow's full load costs about 0.1 ms per series, most of a 10,000-series batch's validation.
ITEM_LOAD = DirectLoad(_SERIES, ("id", "values", "timestamps", "name", "period", "max_lag", "confidence", "model_df",
                                        "horizon"),
                       DIRECT_CHECKS)


def _prepare_item(item, shared: dict, cfg, seen: dict, index: int, axes: dict | None = None,
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
        series = prepare(data, cfg["MAX_POINTS"], axes)
        plan = plan_for(series, opts, cfg)
    except Problem as problem:
        problem.errors = [  # a shared option that does not fit this series keeps its own (top-level) pointer
            e if _first_token(e.pointer) in shared and _first_token(e.pointer) not in own else e.under(prefix)
            for e in problem.errors
        ]
        raise
    return series, plan


def prepare_items(raw: list, shared: dict, cfg, fast: bool = True, booleans: bool = True):
    """Every item validated, cleaned and planned, in request order.

    Returns ``prepared`` ((series, plan) pairs), ``where`` (for each, its request index and id)
    and ``errors`` ((request index, error result) pairs). Plain items take the bulk path of
    :mod:`lagsight.inputs.batch_items` when ``fast`` is true; every other item, and any plain item that
    a bulk check refuses, takes the general path (:func:`_prepare_item`), so both give the same
    answer. ``booleans`` false promises that the body holds no JSON boolean (see batch_items.bulk_values).
    """
    errors: list[tuple[int, dict]] = []
    prepared: list[tuple[PreparedSeries, Plan]] = []
    where: list[tuple[int, object]] = []  # prepared position -> (request index, id)
    seen: dict = {}
    rows: dict[int, object] = {}
    own: dict[int, dict] = {}
    if fast:
        groups, own = batch_items.candidates(raw, shared, cfg["MAX_POINTS"])
        for members in groups.values():
            x, usable = batch_items.bulk_values(raw, members, booleans)
            rows.update(zip(usable, x))
    plans: dict = {}
    axes: dict = {}  # timestamps -> time axis, shared by the series of this request that send the same stamps
    for i, item in enumerate(raw):
        row = rows.get(i)
        if row is not None:
            done = _prepare_plain(item, row, own.get(i), shared, cfg, seen, plans, i)
            if done is not None:
                prepared.append(done)
                where.append((i, item["id"]))
                continue
        try:
            prepared.append(_prepare_item(item, shared, cfg, seen, i, axes))
            where.append((i, _item_id(item)))
        except Problem as problem:
            errors.append((i, _error_result(_item_id(item), problem)))
    return prepared, where, errors


def _prepare_plain(item: dict, row, own: dict | None, shared: dict, cfg, seen: dict, plans: dict, index: int):
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
            plan = plan_for(series, opts, cfg)
        except Problem:
            return None
        plans[key] = plan
    seen[item_id] = index
    return series, plan


def _first_token(pointer: str) -> str | None:
    """The first reference token of a JSON pointer ("/max_lag/0" -> "max_lag"; "" -> None)."""
    return pointer.split("/")[1] if pointer.startswith("/") else None


def _check_simulation(prepared: list[tuple[PreparedSeries, Plan]], cfg) -> None:
    """422 before any simulation when the batch's Monte Carlo work, one null per distinct plan, exceeds
    MAX_SIMULATED_VALUES (replicates x n summed over the plans)."""
    plans = {plan for _, plan in prepared}
    total = sum(plan.spec.replicates * plan.n for plan in plans)
    if total > cfg["MAX_SIMULATED_VALUES"]:
        detail = (f"Monte Carlo p-values for this batch need {total} simulated values (replicates x n over "
                  f"{sum(1 for p in plans if p.spec.replicates)} distinct series lengths and options), more than "
                  f"this deployment's limit of {cfg['MAX_SIMULATED_VALUES']}; use fewer replicates, fewer distinct "
                  "lengths, or asymptotic p-values.")
        raise Problem("invalid-content", detail, [FieldError("/replicates", detail)])


def _error_result(item_id, problem: Problem) -> dict:
    return {"id": item_id, "error": problem.as_dict(request.path)}


@bp.post("/v1/diagnostics/batch")
def diagnose_batch():
    """Diagnose every series of a batch; one bad series never sinks the others."""
    media = _negotiate()
    # Tens of thousands of small acyclic objects (the parsed body, the prepared series, the results)
    # live and die inside this request: the cyclic collector stays paused until they are freed, so
    # that it never scans them (see pipeline.gc_paused). A streamed answer pauses it block by block.
    with gc_paused():
        return _answer(media)


def _answer(media: str) -> Response:
    body = read_json_object(request)
    cfg = current_app.config
    _check_size(body, cfg)
    shared = load(_REQUEST, body)
    _check_shared(shared, cfg)
    raw = shared.pop("series")
    detail = shared["detail"]  # stays among the options: plan_for reads it
    if shared.get("p_values") == "monte_carlo" and shared.get("seed") is None:
        # One seed for the whole batch (reported in every result), so that series of equal length
        # share one simulated null instead of one simulation each.
        shared["seed"] = secrets.randbits(63)
    data = read_body(request)  # the body as read (kept by payload.py): no JSON boolean without these bytes
    estimate = budget.box_cox_estimates(budget.Estimate(), *_box_cox_requests(raw, shared))
    budget.check(estimate, "/series")  # before the series are prepared, where the estimates run
    prepared, where, errors = prepare_items(raw, shared, cfg, booleans=b"true" in data or b"false" in data)
    del body, raw, data  # the parsed request is no longer needed: free it before the engine runs
    _check_simulation(prepared, cfg)
    budget.check(budget.engine_work(estimate, prepared, detail), "/series")
    summary = across.Tally(len(where) + len(errors), 1.0 - shared["confidence"])
    notes = _brief_notes(prepared) if detail == "brief" else {}
    if media == NDJSON:
        return Response(stream_with_context(_stream(errors, prepared, where, summary, detail, notes)),
                        mimetype=NDJSON)
    results: list = [None] * (len(where) + len(errors))
    for i, result in errors:
        results[i] = result
    late: list[Problem] = []
    for block in _blocks_in_time(prepared, detail, late):
        for j, report in block:
            i, item_id = where[j]
            results[i] = {"id": item_id, **report}
            summary.add(results[i], i, 1.0 - prepared[j][1].spec.confidence)
    if late:
        raise late[0]
    for _, result in errors:
        summary.add(result)
    answer = {"results": results, "summary": summary.across()}
    if detail == "brief":
        answer = {"detail": detail, **answer, **notes}
    return json_response(answer)  # the results are freed on return, the collector still paused


def _box_cox_requests(raw: list, shared: dict) -> tuple[int, int]:
    """How many series ask for a Box-Cox lambda estimate, and their points (read before validation)."""
    count = points = 0
    for item in raw:
        if not isinstance(item, dict):
            continue
        transform = item.get("transform") if "transform" in item else shared.get("transform")
        if isinstance(transform, dict) and transform.get("box_cox") == "estimate":
            count += 1
            values = item.get("values")
            points += len(values) if isinstance(values, list) else 0
    return count, points


def _blocks_in_time(prepared: list, detail: str, late: list):
    """The engine's blocks (pipeline.run_blocks) while the request is within its deadline, checked before
    each engine pass. At the deadline it stops and appends the 503 problem to ``late``: a pass that has
    started is not interrupted, so a request ends at most one pass after its deadline."""
    done = 0
    passes = run_blocks(prepared, detail, observe=metrics.record_analysed)
    try:
        while True:
            if budget.deadline_passed():
                late.append(budget.late(done, len(prepared)))
                return
            block = next(passes, None)
            if block is None:
                return
            done += len(block)
            yield block
    finally:
        passes.close()


def _brief_notes(prepared: list[tuple[PreparedSeries, Plan]]) -> dict:
    """The cautions and the pointer to the full report that a brief answer carries once."""
    cautions = cautions_mod.batch_cautions(len(prepared), sum(1.0 - plan.spec.confidence for _, plan in prepared),
                                    any(plan.spec.model_df == 0 for _, plan in prepared))
    return {"cautions": cautions, "full_report": brief.FULL_REPORT}


def _line(obj) -> bytes:
    return dumps(obj) + b"\n"


def _stream(errors, prepared, where, summary: across.Tally, detail: str, notes: dict):
    """NDJSON lines in request order (each carries its ``index``): a line is held until every earlier series
    has its line, and each block sends what it lets go; then the summary (with the brief answer's cautions
    and pointer to the full report). Series that failed validation wait for their turn like the others."""
    held: dict[int, bytes] = {}
    sent = 0

    def hold(i: int, result: dict) -> None:
        held[i] = _line({"kind": "result", "index": i, **result})

    def release(everything: bool = False) -> bytes:
        nonlocal sent
        out = []
        while sent in held:
            out.append(held.pop(sent))
            sent += 1
        if everything:  # after a failure: what was computed, still in increasing index
            out.extend(held.pop(i) for i in sorted(held))
        return b"".join(out)

    try:
        for i, result in errors:
            summary.add(result)
            hold(i, result)
        late: list[Problem] = []
        done = bytearray(len(prepared))
        for block in _blocks_in_time(prepared, detail, late):
            for j, report in block:
                i, item_id = where[j]
                result = {"id": item_id, **report}
                summary.add(result, i, 1.0 - prepared[j][1].spec.confidence)
                done[j] = 1
                hold(i, result)
            if chunk := release():
                yield chunk
        for j in (j for j in range(len(prepared)) if late and not done[j]):  # one error line per series not done
            result = _error_result(where[j][1], late[0])
            summary.add(result)
            hold(where[j][0], result)
        yield release() + _line({"kind": "summary", "summary": summary.across(), **notes})
    except Exception:  # the status line is sent: end the stream with an error line instead
        log.exception("unhandled error while streaming", extra={"request_id": request_id(), "route": route_label()})
        problem = Problem("internal-error", "The service failed while streaming this batch; it has been logged. "
                                            "Results already sent are valid; the others were not computed.")
        yield release(everything=True) + _line({"kind": "error", "error": problem.as_dict(request.path)})

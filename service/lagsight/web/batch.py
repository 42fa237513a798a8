"""POST /v1/diagnostics/batch: many series in one request, one result per series.

Each series is validated and prepared on its own: a bad one becomes an ``error``
result (problem details with pointers under ``/series/<i>``) and the others go on.
Series that share a plan are analysed together (see :mod:`lagsight.pipeline`).
With ``Accept: application/x-ndjson`` the results are streamed, one JSON object
per line, as each engine block finishes.
"""
from __future__ import annotations

import logging

from flask import Blueprint, Response, current_app, request, stream_with_context

from lagsight.consult import across
from lagsight.handling import (  # noqa: F401  (ITEM_LOAD and prepare_items are read here by tests and benchmarks)
    ITEM_LOAD,
    batch_options,
    brief_notes,
    check_simulation,
    error_result,
    prepare_items,
)
from lagsight.inputs.series import PreparedSeries
from lagsight.outputs.encode import dumps
from lagsight.outputs.shared import strip, template
from lagsight.pipeline import Plan, gc_paused, run_blocks
from lagsight.problems import FieldError, Problem
from lagsight.web import budget, metrics
from lagsight.web.observability import request_id, route_label
from lagsight.web.payload import read_body, read_json_object, release_body

bp = Blueprint("batch", __name__)
log = logging.getLogger("lagsight")

JSON = "application/json"
NDJSON = "application/x-ndjson"


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
    shared = batch_options(body, cfg)  # one Monte Carlo seed for the whole batch when none is sent
    raw = shared.pop("series")
    detail = shared["detail"]  # stays among the options: plan_for reads it
    digits, charts = shared["digits"], shared["charts"]
    data = read_body(request)  # the body as read (kept by payload.py): no JSON boolean without these bytes
    estimate = budget.box_cox_estimates(budget.Estimate(), *_box_cox_requests(raw, shared))
    budget.check(estimate, "/series")  # before the series are prepared, where the estimates run
    prepared, where, errors = prepare_items(raw, shared, cfg, booleans=b"true" in data or b"false" in data,
                                            instance=request.path)
    del body, raw, data  # the parsed request is no longer needed: free it before the engine runs
    release_body(request)  # and the bytes payload.py kept
    check_simulation(prepared, cfg)
    budget.check(budget.engine_work(estimate, prepared, detail), "/series")
    summary = across.Tally(len(where) + len(errors), 1.0 - shared["confidence"])
    notes = _brief_notes(prepared) if detail == "brief" else {}
    if media == NDJSON:
        return Response(stream_with_context(_stream(errors, prepared, where, summary, (detail, digits, charts),
                                                    notes)), mimetype=NDJSON)
    # Each result is encoded as soon as its block is done and only its bytes are kept: the answer never
    # exists as Python objects all at once (a full report is several times its JSON size in memory).
    parts: list = [None] * (len(where) + len(errors))
    for i, result in errors:
        parts[i] = dumps(result)
    shared = None  # with detail "full", the shared block: the first analysed result's values (outputs/shared.py)
    late: list[Problem] = []
    for block in _blocks_in_time(prepared, (detail, digits, charts), late):
        encoded = []
        for j, report in block:
            i, item_id = where[j]
            result = {"id": item_id, **report}
            summary.add(result, i, 1.0 - prepared[j][1].spec.confidence)
            if detail != "brief":
                if shared is None:
                    shared = template(result)
                strip(result, shared)
            encoded.append((i, dumps(result)))
        block = result = None  # the block's reports are freed before the next engine pass
        _keep_runs(parts, encoded)
    if late:
        raise late[0]
    for _, result in errors:
        summary.add(result)
    if detail == "brief":
        head = b'{"detail":"brief","results":['
        tail = b'],"summary":' + dumps(summary.across()) + b"," + dumps(notes)[1:-1] + b"}"
    else:
        head = b'{"shared":' + dumps(shared or {}) + b',"results":['
        tail = b'],"summary":' + dumps(summary.across()) + b"}"
    # The body is sent piece by piece from the encoded results (no joined copy of the whole answer).
    pieces = sum(1 for p in parts if p)
    length = len(head) + sum(map(len, parts)) + max(pieces - 1, 0) + len(tail)
    return Response(_pieces(head, parts, tail), mimetype=JSON, headers={"Content-Length": str(length)})


def _keep_runs(parts: list, encoded: list[tuple[int, bytes]]) -> None:
    """A block's encoded results kept in ``parts`` as one bytes object per run of consecutive indices (results
    joined by commas, at the run's first index; ``b""`` at the others). Thousands of small bytes objects kept
    across engine passes would pin the heap between them: a full batch's worker grew by about three times the
    encoded size; one object per run lets the next pass reuse the freed space."""
    encoded.sort(key=lambda pair: pair[0])
    run: list[bytes] = []
    start = prev = None
    for i, piece in encoded:
        if run and i != prev + 1:
            parts[start] = b",".join(run)
            run = []
        if not run:
            start = i
        else:
            parts[i] = b""
        run.append(piece)
        prev = i
    if run:
        parts[start] = b",".join(run)


def _pieces(head: bytes, parts: list[bytes], tail: bytes):
    """The answer's bytes: head, the results (runs of them) separated by commas (each freed once sent), tail."""
    yield head
    first = True
    for k in range(len(parts)):
        piece, parts[k] = parts[k], None
        if not piece:  # a result sent with its run
            continue
        yield piece if first else b"," + piece
        first = False
    yield tail


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


def _blocks_in_time(prepared: list, answer: tuple[str, int | None, bool], late: list):
    """The engine's blocks (pipeline.run_blocks with ``answer`` = (detail, digits, charts)) while the request is
    within its deadline, checked before each engine pass. At the deadline it stops and appends the 503 problem
    to ``late``: a pass that has started is not interrupted, so a request ends at most one pass after its
    deadline."""
    done = 0
    detail, digits, charts = answer
    passes = run_blocks(prepared, detail, observe=metrics.record_analysed, digits=digits, charts=charts)
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
            block = None  # the block's reports are freed before the next engine pass, not after it
    finally:
        passes.close()


def _brief_notes(prepared: list[tuple[PreparedSeries, Plan]]) -> dict:
    """The cautions and the pointer to the full report that a brief answer carries once."""
    return brief_notes(len(prepared), sum(1.0 - plan.spec.confidence for _, plan in prepared),
                       any(plan.spec.model_df == 0 for _, plan in prepared),
                       horizons={plan.spec.horizon for _, plan in prepared})


def _line(obj) -> bytes:
    return dumps(obj) + b"\n"


def _stream(errors, prepared, where, summary: across.Tally, answer: tuple, notes: dict):
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
        for block in _blocks_in_time(prepared, answer, late):
            for j, report in block:
                i, item_id = where[j]
                result = {"id": item_id, **report}
                summary.add(result, i, 1.0 - prepared[j][1].spec.confidence)
                done[j] = 1
                hold(i, result)
            if chunk := release():
                yield chunk
        for j in (j for j in range(len(prepared)) if late and not done[j]):  # one error line per series not done
            result = error_result(where[j][1], late[0], request.path)
            summary.add(result)
            hold(where[j][0], result)
        yield release() + _line({"kind": "summary", "summary": summary.across(), **notes})
    except Exception:  # the status line is sent: end the stream with an error line instead
        log.exception("unhandled error while streaming", extra={"request_id": request_id(), "route": route_label()})
        problem = Problem("internal-error", "The service failed while streaming this batch; it has been logged. "
                                            "Results already sent are valid; the others were not computed.")
        yield release(everything=True) + _line({"kind": "error", "error": problem.as_dict(request.path)})

"""GET or POST /v1/diagnostics: the single-series diagnosis, as JSON, CSV, SVG or PNG.

Bodies: application/json (the request schema) or text/csv (csv_input.py, with the
options as query parameters). GET takes the series from the query string
(``values=1.2,3.4,,5``; an empty item is missing) for short series and image links.
The response format is ``format`` if given, else the best match of ``Accept``.
The body's content is loaded, prepared and planned by :mod:`lagsight.handling`, as ``lagsight.diagnose`` does.
"""
from __future__ import annotations

from flask import Blueprint, Response, current_app, request
from werkzeug.datastructures import ImmutableMultiDict

from lagsight import options
from lagsight.handling import SINGLE_LOAD, load, ready, single_answer
from lagsight.inputs import csv_input, numbers
from lagsight.outputs import vega_lite
from lagsight.outputs.csv_table import correlogram_table
from lagsight.problems import Problem
from lagsight.web import budget, metrics, query
from lagsight.web.payload import media_type, read_body, read_json_object
from lagsight.web.responses import json_response

bp = Blueprint("diagnostics", __name__)
CSV_TYPES = ("text/csv", "application/csv")
_ANALYSIS = (*query.ANALYSIS_PARAMS, *query.TRANSFORM_PARAMS)
_NO_ARGS = ImmutableMultiDict()


def _negotiate(requested: str | None) -> str:
    if requested is not None:
        return requested
    if "HTTP_ACCEPT" not in request.environ:  # no Accept header: nothing to parse
        return options.DEFAULT_FORMAT
    accept = request.accept_mimetypes
    if not accept:
        return options.DEFAULT_FORMAT
    media = accept.best_match(list(options.FORMATS.values()) + ["application/problem+json"])
    if media is None:
        raise Problem("not-acceptable", f"Cannot answer in {request.headers.get('Accept')!r}; this route answers "
                                        f"{', '.join(options.FORMATS.values())} (or choose with format=).")
    return next((k for k, v in options.FORMATS.items() if v == media), options.DEFAULT_FORMAT)


def _from_query(args) -> dict:
    body = query.analysis_fields(args)
    if "values" in args:
        body["values"] = [None if v.strip().lower() in ("", "null") else _number(v) for v in args["values"].split(",")]
    if "timestamps" in args:
        body["timestamps"] = [s.strip() for s in args["timestamps"].split(",")]
    return body


def _number(text: str):
    """An item of ``values=`` read by the one rule for numbers as text (inputs/numbers.py), with a decimal point:
    commas separate the items. Text that is not a number is left for the schema to point at."""
    try:
        number = numbers.read(text, ".")
    except ValueError:
        return text
    return text if number is None else number


def _with_lines(problem: Problem, raw: dict) -> Problem:
    """Add the CSV line and column to errors that point at a value or timestamp of a CSV body."""
    for prefix, key in (("/timestamps/", "_stamp"), ("/values/", "_value")):
        lines, column = raw.get(key + "_lines"), raw.get(key + "_column")
        if not lines:
            continue
        for e in problem.errors:
            index = e.pointer[len(prefix):]
            if e.pointer.startswith(prefix) and index.isdigit() and int(index) < len(lines) and e.line is None:
                e.line, e.column = lines[int(index)], column
                e.detail = f"Line {e.line}, column {column}: {e.detail}"
    return problem


def _query_args():
    """The query parameters; a request without a query string skips parsing one."""
    return request.args if request.environ.get("QUERY_STRING") else _NO_ARGS


def _read_request() -> dict:
    args = _query_args()
    if request.method == "GET":
        query.check_known(args, (*query.OUTPUT_PARAMS, *_ANALYSIS, "values", "timestamps"))
        return _from_query(args)
    if media_type(request) in CSV_TYPES:
        query.check_known(args, (*query.OUTPUT_PARAMS, *query.CSV_PARAMS, *_ANALYSIS))
        raw = csv_input.read_series(read_body(request), args)
        fields = {k: v for k, v in raw.items() if not k.startswith("_")}
        return {**fields, **query.analysis_fields(args), "_raw": raw}
    query.check_known(args, query.OUTPUT_PARAMS)
    return read_json_object(request)


@bp.route("/v1/diagnostics", methods=["GET", "POST"])
def diagnose():
    """Diagnose one series and answer with its report (JSON), its correlogram table (CSV) or a chart."""
    out = query.output_options(_query_args())
    fmt = _negotiate(out["format"])
    body = _read_request()
    raw = body.pop("_raw", {})
    cfg = current_app.config
    try:
        data = load(SINGLE_LOAD, body)
        body = None  # the parsed JSON (a Python float per value) is not needed past validation: free it now
        if fmt != "json":  # tables and images are drawn from the full report and its chart data
            data.update(detail="full", charts=fmt != "csv")
        elif out["vega_lite"]:
            data["charts"] = True  # the specifications are built on the chart data
        series, plan = ready(data, cfg)  # the same steps as lagsight.diagnose (lagsight.handling)
    except Problem as problem:
        raise _with_lines(problem, raw) from None
    budget.check(budget.engine_work(budget.Estimate(), [(series, plan)], data["detail"]), "")
    if budget.deadline_passed():  # reading and preparing took the request's time: the engine would run late
        raise budget.late(0, 1)
    report = single_answer(series, plan, data, metrics.record_analysed)
    if fmt == "csv":
        return Response(correlogram_table(report), mimetype="text/csv",
                        headers={"Content-Disposition": 'inline; filename="lagsight-correlogram.csv"'})
    if fmt in ("svg", "png"):
        from lagsight.outputs.render import render

        return Response(render(report, out["chart"], fmt), mimetype=options.FORMATS[fmt])
    if out["vega_lite"] and report.get("charts"):
        vega_lite.attach(report["charts"], report["name"])
    return json_response(report)



"""POST /v1/stability: diagnose a series window by window and say when its structure or variance changed.

The series is prepared as for /v1/diagnostics; every window is then a series of its own, diagnosed by
the same pipeline (windows of equal length share one plan, so they go through the engine together as
one array), and the change reading of :mod:`lagsight.engine.changepoints` runs on blocks of one window.
"""
from __future__ import annotations

import secrets

import numpy as np
from flask import Blueprint, Response, current_app, request

from lagsight import options
from lagsight.engine.changepoints import MIN_BLOCKS, find_changes
from lagsight.inputs.series import PreparedSeries, prepare
from lagsight.inputs.stability import StabilityRequest, window_starts
from lagsight.outputs import stability as outputs
from lagsight.pipeline import plan_for, run
from lagsight.problems import Problem, invalid
from lagsight.web import metrics
from lagsight.web.diagnostics import load
from lagsight.web.payload import read_json_object
from lagsight.web.responses import json_response

bp = Blueprint("stability", __name__)
_SCHEMA = StabilityRequest()
#: Answer formats: ``format`` in the query string, else the best match of Accept.
FORMATS = {"json": "application/json", "svg": "image/svg+xml", "png": "image/png"}


def _format() -> str:
    requested = request.args.get("format")
    unknown = set(request.args) - {"format"}
    if unknown:
        raise invalid(f"/{sorted(unknown)[0]}", f"Unknown query parameter {sorted(unknown)[0]!r}; this route takes "
                                                "only format (json, svg or png).")
    if requested is not None:
        if requested not in FORMATS:
            raise invalid("/format", f"format must be one of {', '.join(FORMATS)}, got {requested!r}.")
        return requested
    if not request.headers.get("Accept"):
        return "json"
    best = request.accept_mimetypes.best_match(list(FORMATS.values()))
    if best is None:
        raise Problem("not-acceptable", f"/v1/stability answers {', '.join(FORMATS.values())} (or choose with "
                                        "format=); the Accept header allows none of them.")
    return next(k for k, v in FORMATS.items() if v == best)


def _check(data: dict, length: int, cfg) -> tuple[int, list[int]]:
    width = data["window"]
    if width > length:
        raise invalid("/window", f"window ({width}) must be at most the number of values ({length}).")
    step = data["step"] or max(1, width // 2)
    if step > width:
        raise invalid("/step", f"step ({step}) must be at most the window ({width}), or values would go unchecked.")
    if data["max_lag"] is not None and data["max_lag"] >= width:
        raise invalid("/max_lag", f"max_lag must be less than the window ({width}), got {data['max_lag']}.")
    starts = window_starts(length, width, step)
    most = min(options.STABILITY_MAX_WINDOWS, cfg["MAX_SERIES"], cfg["MAX_BATCH_POINTS"] // width)
    if len(starts) > most:
        raise invalid("/step", f"{len(starts)} windows of {width} values are more than the {most} one request may "
                               f"diagnose; raise step to at least {-(-(length - width) // (most - 1))}.")
    return step, starts


def _window(series: PreparedSeries, start: int, width: int, method: str, cfg) -> PreparedSeries:
    values = series.values[start:start + width]
    period = series.period if series.period is not None and series.period < width else None
    return prepare({"values": values, "timestamps": None, "period": period, "name": None, "transform": None,
                    "missing": method if np.isnan(values).any() else "refuse"}, cfg["MAX_POINTS"])


@bp.post("/v1/stability")
def stability():
    """Diagnose every window, then read the changes; answer JSON or an image of it."""
    fmt = _format()
    cfg = current_app.config
    data = load(_SCHEMA, read_json_object(request))
    series = prepare(data, cfg["MAX_POINTS"])
    step, starts = _check(data, series.length, cfg)
    width = data["window"]
    if data["p_values"] == "monte_carlo" and data["seed"] is None:
        data["seed"] = secrets.randbits(63)  # one seed for every window: equal windows share one simulated null
    items, errors = [], {}
    for i, start in enumerate(starts):
        try:
            window = _window(series, start, width, series.missing["method"], cfg)
            items.append((i, window, plan_for(window, data, cfg)))
        except Problem as problem:
            errors[i] = problem.detail
    reports = dict(zip((i for i, _, _ in items), run([(w, p) for _, w, p in items], observe=metrics.record_analysed)))
    labels = series.labels
    windows = [outputs.window_entry(i, start, width, series.values[start:start + width], labels, reports.get(i),
                                    errors.get(i)) for i, start in enumerate(starts)]
    alpha = 1.0 - data["confidence"]
    if series.length // width >= MIN_BLOCKS:
        stats, found = find_changes(series.values, width, alpha)
    else:
        stats, found = None, []
    changes = outputs.change_block(stats, found, width, series.length, labels, alpha)
    answer = outputs.answer(series.name, series.n, width, step, data["confidence"], windows, changes, labels)
    if fmt != "json":
        from lagsight.outputs.stability_image import render  # matplotlib only when an image is asked for

        return Response(render(answer, fmt), mimetype=FORMATS[fmt])
    return json_response(answer)

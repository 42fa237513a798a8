"""POST /v1/stability: diagnose a series window by window and say when its structure or variance changed.

The series is prepared as for /v1/diagnostics; every window is then a series of its own, diagnosed by
the same pipeline (windows of equal length share one plan, so they go through the engine together as
one array), and the change reading of :mod:`lagsight.engine.changepoints` runs on blocks of one window.
The content is handled by :func:`lagsight.follow_up.stability`, as ``lagsight.stability`` does; what stays here
is HTTP's: the answer's format (JSON or an image) and the cost budget (web/budget.py).
"""
from __future__ import annotations

from flask import Blueprint, Response, current_app, request

from lagsight import follow_up
from lagsight.problems import Problem, invalid
from lagsight.web import budget, metrics
from lagsight.web.diagnostics import load
from lagsight.web.payload import read_json_object
from lagsight.web.responses import json_response

bp = Blueprint("stability", __name__)
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


@bp.post("/v1/stability")
def stability():
    """Diagnose every window, then read the changes; answer JSON or an image of it."""
    fmt = _format()
    cfg = current_app.config
    data = load(follow_up.STABILITY, read_json_object(request))
    budget.check_stability(data, cfg)
    late = budget.checkpoint("windows", "Raise step or window (fewer windows), or send fewer values.")
    answer = follow_up.stability(data, cfg, metrics.record_analysed, late)
    if fmt != "json":
        from lagsight.outputs.stability_image import render  # matplotlib only when an image is asked for

        return Response(render(answer, fmt), mimetype=FORMATS[fmt])
    return json_response(answer)

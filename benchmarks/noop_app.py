"""The service plus one benchmark-only route, POST /bench/noop, served by the same gunicorn.

The no-op reads the body and answers a tiny JSON object through the same middleware
(request ids, security headers, access log), so that it measures the server's cost
per request without the diagnosis. It is never part of the service itself.
"""
from __future__ import annotations

from flask import Blueprint, request

from lagsight import create_app
from lagsight.web.responses import json_response

bench = Blueprint("bench", __name__)


@bench.post("/bench/noop")
def noop():
    """Read the body and do nothing with it."""
    request.get_data()
    return json_response({"ok": True})


app = create_app()
app.register_blueprint(bench)

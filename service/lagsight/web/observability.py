"""Request ids, JSON log lines and request metrics.

Each request gets an id: the caller's ``X-Request-ID`` when it is a plain token
(letters, digits, ``.-_:``, at most 128 characters), a fresh one otherwise; it is
echoed in the response and written on every log line about the request. The one
access line per request records method, route, status, duration and body size:
never a body, so never a series value. Crashes are logged with the exception
type and stack frames but not the exception message, which could quote data.

Nothing else a caller sends reaches a log line or a metric label: the route is the
matched rule's template (``(unmatched)`` otherwise), never the path, and a method
outside the standard ones is recorded as ``(other)``.
"""
from __future__ import annotations

import logging
import re
import sys
import threading
import time
import traceback
import uuid
from datetime import datetime, timezone

import orjson
from flask import Flask, g, request

from lagsight.web import metrics

REQUEST_ID_HEADER = "X-Request-ID"
_TOKEN = re.compile(r"[A-Za-z0-9._:-]{1,128}")
_STANDARD = set(vars(logging.LogRecord("", 0, "", 0, "", None, None))) | {"message", "asctime"}

log = logging.getLogger("lagsight")
access = logging.getLogger("lagsight.access")

#: Methods recorded as sent; any other (a token the caller chose) is recorded as "(other)".
STANDARD_METHODS = frozenset({"GET", "HEAD", "POST", "PUT", "DELETE", "CONNECT", "OPTIONS", "TRACE", "PATCH"})
#: The request id of the request this thread is serving, for answers written outside Flask
#: (a worker stopped by its timeout; see lagsight.serving.server_errors). The server clears it
#: before each request.
_current = threading.local()


class JsonFormatter(logging.Formatter):
    """One JSON object per line: time, level, logger, message and any ``extra`` fields."""

    def format(self, record: logging.LogRecord) -> str:
        entry = {
            "time": datetime.fromtimestamp(record.created, timezone.utc).isoformat(timespec="milliseconds"),
            "level": record.levelname,
            "logger": record.name,
            "pid": record.process,
            "message": record.getMessage(),
        }
        entry.update({k: v for k, v in vars(record).items() if k not in _STANDARD and not k.startswith("_")})
        if record.exc_info and record.exc_info[0] is not None:
            entry.update(exception_fields(record.exc_info[1]))
        return orjson.dumps(entry, default=str).decode()


def exception_fields(exc: BaseException) -> dict:
    """The type and the stack frames of an exception, without its message (which may quote request data)."""
    frames = traceback.extract_tb(exc.__traceback__)
    return {
        "exception": type(exc).__qualname__,
        "frames": [f"{f.filename.rsplit('/', 1)[-1]}:{f.lineno} {f.name}" for f in frames[-12:]],
    }


def request_id() -> str:
    return g.get("request_id") or "-"


def current_request_id() -> str | None:
    """The id given to the request this thread is serving, once the application has seen it (else None)."""
    return getattr(_current, "request_id", None)


def forget_request_id() -> None:
    _current.request_id = None


def method_label() -> str:
    """The request's method for logs and metrics: a standard method as sent, any other as "(other)"."""
    method = request.method
    return method if method in STANDARD_METHODS else "(other)"


def route_label() -> str:
    """The matched rule's template, never the path the caller sent."""
    return request.url_rule.rule if request.url_rule is not None else "(unmatched)"


def configure_logging(level: str) -> None:
    """Send the lagsight loggers to stderr as JSON lines (once per process)."""
    if not any(isinstance(h.formatter, JsonFormatter) for h in log.handlers):
        handler = logging.StreamHandler(sys.stderr)
        handler.setFormatter(JsonFormatter())
        log.addHandler(handler)
        log.propagate = False
    log.setLevel(level)


def init_app(app: Flask) -> None:
    configure_logging(app.config["LOG_LEVEL"])

    @app.before_request
    def _start():
        g.started = time.perf_counter()
        given = request.headers.get(REQUEST_ID_HEADER, "")
        g.request_id = _current.request_id = given if _TOKEN.fullmatch(given) else uuid.uuid4().hex

    @app.after_request
    def _finish(response):
        rid = g.get("request_id") or uuid.uuid4().hex
        response.headers[REQUEST_ID_HEADER] = rid
        seconds = time.perf_counter() - g.get("started", time.perf_counter())
        route, method = route_label(), method_label()
        metrics.record_request(route, method, response.status_code, seconds)
        if not access.isEnabledFor(logging.INFO):  # e.g. LAGSIGHT_LOG_LEVEL=WARNING: build no log record
            return response
        access.info(
            "request", extra={
                "request_id": rid, "method": method, "route": route, "status": response.status_code,
                "duration_ms": round(seconds * 1000, 3), "request_bytes": request.content_length,
                # None for a streamed body: measuring it would read (and so buffer) the whole stream first
                "response_bytes": None if response.is_streamed else response.calculate_content_length(),
            },
        )
        return response

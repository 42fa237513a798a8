"""gunicorn's own error answers and log lines, in the service's shape and without the caller's bytes.

Some requests never reach the application: a malformed request line, a request
line or headers over gunicorn's limits, an unsupported Expect or transfer coding.
gunicorn answers those itself with a small HTML page and logs a warning whose text
quotes the offending bytes. Installed by ``lagsight.serving.gunicorn_conf``, this module
makes that answer the same RFC 9457 problem document as every other error, with the
same security headers (``lagsight.web.security.data_headers``) and an ``X-Request-ID``
that the log line carries too, and it keeps the caller's bytes out of both: the error
is described by its kind ("invalid header name"), never by what was sent.

A worker stopped while it serves a request (gunicorn's worker timeout aborts it; a
fast shutdown quits it) answers 503 ``unavailable`` with the request's own id, logs
one line with that id and counts it in ``lagsight_requests_stopped_total``, instead
of gunicorn's generic 500.
"""
from __future__ import annotations

import logging
import re
import threading
import uuid

import orjson
from gunicorn import util
from gunicorn.workers.base import Worker

from lagsight.problems import KINDS, PROBLEM_MEDIA_TYPE, TYPE_PREFIX
from lagsight.web import metrics, observability
from lagsight.web.security import data_headers

log = logging.getLogger("gunicorn.error")

_SLUG_BY_STATUS = {status: slug for slug, (status, _) in KINDS.items()}
_MAX_DETAIL = 300
#: gunicorn's parse errors in words, for the few whose class name reads badly; others from the class name.
_PLAIN = {
    "LimitRequestLine": "request line over the server's limit",
    "LimitRequestHeaders": "request headers over the server's limit",
    "InvalidHTTPVersion": "invalid HTTP version",
    "NoMoreData": "connection ended before the request did",
}
#: The id of the request whose error this thread is answering (read by the log filter and the writer).
_answering = threading.local()


def problem_bytes(status: int, reason: str, message: str, request_id: str | None = None,
                  headers: list[tuple[str, str]] | None = None) -> bytes:
    """The full HTTP/1.1 response for a server-level error."""
    slug = _SLUG_BY_STATUS.get(status, "bad-request" if status < 500 else "internal-error")
    detail = f"{reason}: {message}" if message else reason
    body = orjson.dumps({
        "type": TYPE_PREFIX + slug,
        "title": KINDS[slug][1],
        "status": status,
        "detail": detail[:_MAX_DETAIL],
        "instance": None,
    })
    lines = [f"HTTP/1.1 {status} {reason}", "Connection: close", f"Content-Type: {PROBLEM_MEDIA_TYPE}",
             f"Content-Length: {len(body)}"]
    lines += [f"{name}: {value}" for name, value in (headers if headers is not None else data_headers("'self'"))]
    if request_id:
        lines.append(f"{observability.REQUEST_ID_HEADER}: {request_id}")
    return ("\r\n".join(lines) + "\r\n\r\n").encode("latin-1") + body


def plain_text(exc: BaseException) -> str:
    """What kind of error ``exc`` is, in words, without its message (which quotes the caller's bytes)."""
    name = type(exc).__name__
    return _PLAIN.get(name) or re.sub(r"(?<=[a-z])(?=[A-Z])", " ", name).lower()


_plain_classes: dict[type, type] = {}


def without_caller_bytes(exc: BaseException) -> BaseException:
    """The same error, of a subclass of its class (so gunicorn picks the same status), whose text is
    :func:`plain_text`: gunicorn's warning and its answer are built from ``str(exc)``."""
    cls = type(exc)
    plain = _plain_classes.get(cls)
    if plain is None:
        plain = _plain_classes[cls] = type(cls.__name__, (cls,), {
            "__str__": lambda self: self._lagsight_text, "__repr__": lambda self: self._lagsight_text,
        })
    out = plain.__new__(plain)
    out.__dict__.update(getattr(exc, "__dict__", {}))  # e.g. the request gunicorn's access log reads
    out._lagsight_text = plain_text(exc)
    return out


class _Unlogged:
    """gunicorn's request as its error path sees it, with the request line hidden: gunicorn logs
    ``req.uri`` (and the method) when an error is not the client's."""

    def __init__(self, req):
        self._req = req

    def __getattr__(self, name):
        if name in ("uri", "path", "query", "fragment"):
            return "(not logged)"
        if name == "method":
            method = getattr(self._req, "method", None)
            return method if method in observability.STANDARD_METHODS else "(other)"
        return getattr(self._req, name)


class RequestIdFilter(logging.Filter):
    """Adds the id of the error being answered to gunicorn's log line about it (logconfig_dict filter)."""

    def filter(self, record: logging.LogRecord) -> bool:
        rid = getattr(_answering, "request_id", None)
        if rid and not hasattr(record, "request_id"):
            record.request_id = rid
        return True


def before_request(worker, req) -> None:
    """gunicorn's pre_request hook: note the request handed to the application (whose id the application
    will set), and forget the previous request's id."""
    _answering.handed_over = req
    observability.forget_request_id()


def install(frame_ancestors: str) -> None:
    """Make gunicorn's error answers problem+json with the service's headers and its error log lines free of
    the caller's bytes (``frame_ancestors``: the deployment's LAGSIGHT_FRAME_ANCESTORS)."""
    headers = data_headers(frame_ancestors)

    def write_problem(sock, status_int, reason, mesg):
        rid = getattr(_answering, "request_id", None) or uuid.uuid4().hex
        util.write_nonblock(sock, problem_bytes(int(status_int), str(reason), str(mesg), rid, headers))

    util.write_error = write_problem
    if getattr(Worker, "_lagsight_handle_error", None) is not None:
        return
    handle_error = Worker.handle_error

    def answer_error(self, req, client, addr, exc):
        handed_over = req is not None and req is getattr(_answering, "handed_over", None)
        # the application's id for a request it was serving; a fresh one for a request it never saw
        _answering.request_id = (handed_over and observability.current_request_id()) or uuid.uuid4().hex
        try:
            if isinstance(exc, SystemExit):  # the worker is being stopped (timeout abort or quick exit)
                _stopped(client, _answering.request_id)
            else:
                handle_error(self, _Unlogged(req) if req is not None else None, client, addr,
                             without_caller_bytes(exc))
        finally:
            _answering.request_id = _answering.handed_over = None

    Worker.handle_error = answer_error
    Worker._lagsight_handle_error = handle_error


def _stopped(client, rid: str) -> None:
    """A worker stopped in the middle of a request: answer 503 with the request's id, log and count it."""
    log.error("request stopped with its worker (worker timeout or quick shutdown)", extra={"request_id": rid})
    metrics.record_stopped("worker")
    try:
        util.write_error(client, 503, "Service Unavailable",
                         "The request was stopped before it finished: it ran past this deployment's worker "
                         "timeout, or the server is shutting down. Retry it, or send less work per request.")
    except Exception:  # the caller may be gone
        pass

"""Flask error handlers: every failure answers in the problem+json shape, crashes included."""
from __future__ import annotations

import logging

from flask import Flask, request
from werkzeug.exceptions import HTTPException, NotFound
from werkzeug.routing import RequestRedirect

from lagsight.problems import KINDS, Problem
from lagsight.web.observability import exception_fields, method_label, request_id, route_label
from lagsight.web.responses import problem_response

log = logging.getLogger("lagsight")

_SLUG_BY_STATUS = {status: slug for slug, (status, _) in KINDS.items()}


def _from_http(exc: HTTPException) -> Problem:
    slug = _SLUG_BY_STATUS.get(exc.code or 500, "bad-request" if (exc.code or 500) < 500 else "internal-error")
    detail = exc.description or KINDS[slug][1]
    if exc.code == 413:
        limit = request.max_content_length
        detail = f"The request body is larger than this deployment's limit of {limit} bytes." if limit else detail
    elif exc.code == 404:
        detail = f"No resource at {request.path}; see /openapi.json for the routes."
    elif exc.code == 405:
        detail = f"{request.method} is not allowed on {request.path}."
    headers = {k: v for k, v in exc.get_headers() if k.lower() == "allow"}
    return Problem(slug, detail, headers=headers)


def _no_redirects() -> None:
    """A path the router would redirect (``//``, a stray slash) is a 404: werkzeug builds the redirect's
    Location from the Host header, which the caller (or anyone on the way) chooses."""
    if isinstance(request.routing_exception, RequestRedirect):
        raise NotFound()


def init_app(app: Flask) -> None:
    app.before_request(_no_redirects)

    @app.errorhandler(Problem)
    def _problem(exc: Problem):
        return problem_response(exc, request.path)

    @app.errorhandler(HTTPException)
    def _http(exc: HTTPException):
        return problem_response(_from_http(exc), request.path)

    @app.errorhandler(Exception)
    def _crash(exc: Exception):
        # type and frames only: the message of an exception can quote request data
        log.error("unhandled error", extra={"request_id": request_id(), "method": method_label(),
                                            "route": route_label(), **exception_fields(exc)})
        return problem_response(Problem("internal-error", "The service failed on this request; it has been logged."), request.path)

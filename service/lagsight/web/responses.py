"""Flask responses: JSON answers and problem+json answers, encoded by :mod:`lagsight.outputs.encode`."""
from __future__ import annotations

from flask import Request, Response

from lagsight.outputs.encode import dumps
from lagsight.problems import PROBLEM_MEDIA_TYPE, Problem


def json_response(obj, status: int = 200, headers: dict | None = None) -> Response:
    return Response(dumps(obj), status=status, headers=headers, mimetype="application/json")


def problem_response(problem: Problem, instance: str | None) -> Response:
    return Response(
        dumps(problem.as_dict(instance)), status=problem.status, headers=problem.headers or None,
        mimetype=PROBLEM_MEDIA_TYPE,
    )


def require_json(request: Request) -> None:
    """406 unless the caller accepts application/json (routes that answer only JSON)."""
    if request.headers.get("Accept") and request.accept_mimetypes.best_match(["application/json"]) is None:
        raise Problem("not-acceptable", f"{request.path} answers application/json (errors application/problem+json), "
                                        "which the Accept header does not allow.")

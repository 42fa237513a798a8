"""Flask responses: JSON answers and problem+json answers, encoded by :mod:`lagsight.outputs.encode`."""
from __future__ import annotations

from flask import Response

from lagsight.outputs.encode import dumps
from lagsight.problems import PROBLEM_MEDIA_TYPE, Problem


def json_response(obj, status: int = 200, headers: dict | None = None) -> Response:
    return Response(dumps(obj), status=status, headers=headers, mimetype="application/json")


def problem_response(problem: Problem, instance: str | None) -> Response:
    return Response(
        dumps(problem.as_dict(instance)), status=problem.status, headers=problem.headers or None,
        mimetype=PROBLEM_MEDIA_TYPE,
    )

"""Responses out: JSON (orjson) and problem+json."""
from __future__ import annotations

import orjson
from flask import Response

from .problems import PROBLEM_MEDIA_TYPE, Problem

_OPTS = orjson.OPT_SERIALIZE_NUMPY


def dumps(obj) -> bytes:
    return orjson.dumps(obj, option=_OPTS)


def json_response(obj, status: int = 200, headers: dict | None = None) -> Response:
    return Response(dumps(obj), status=status, headers=headers, mimetype="application/json")


def problem_response(problem: Problem, instance: str | None) -> Response:
    return Response(
        dumps(problem.as_dict(instance)), status=problem.status, headers=problem.headers or None,
        mimetype=PROBLEM_MEDIA_TYPE,
    )

"""Request bodies in: media type checks and JSON parsing, with clear 4xx answers."""
from __future__ import annotations

import json

import orjson
from flask import Request

from .problems import Problem, invalid

JSON_TYPES = ("application/json",)


def _media_type(request: Request) -> str:
    return (request.mimetype or "").lower()


def is_json(request: Request) -> bool:
    media = _media_type(request)
    return media in JSON_TYPES or media.endswith("+json")


def _stdlib_parse(body: bytes):
    """Second opinion for bodies orjson refuses: reads numbers beyond float range and
    NaN/Infinity literals so the schema can point at the element, and locates real syntax errors."""
    text = body.decode("utf-8")
    return json.loads(text, parse_constant=float)


def read_json_object(request: Request) -> dict:
    """Parse the body as a JSON object, or raise a Problem (400, 413 or 415; 422 for a non-object)."""
    if not is_json(request):
        raise Problem(
            "unsupported-media-type",
            f"Send the body as application/json, or text/csv on /v1/diagnostics (got {request.mimetype or 'no Content-Type'}).",
        )
    body = request.get_data(cache=True)  # raises 413 past MAX_CONTENT_LENGTH, with or without Content-Length
    if not body.strip():
        raise Problem("malformed-json", "The request body is empty; send a JSON object.")
    try:
        data = orjson.loads(body)
    except orjson.JSONDecodeError as first:
        try:
            data = _stdlib_parse(body)
        except UnicodeDecodeError:
            raise Problem("malformed-json", "The request body is not UTF-8 text.") from None
        except RecursionError:
            raise Problem("malformed-json", "The JSON is nested too deeply.") from None
        except json.JSONDecodeError as err:
            raise Problem("malformed-json", f"Invalid JSON at line {err.lineno}, column {err.colno}: {err.msg}.") from None
        except ValueError:
            raise Problem("malformed-json", f"Invalid JSON: {first}.") from None
    if not isinstance(data, dict):
        raise invalid("", f"The body must be a JSON object, got a JSON {type(data).__name__ if data is not None else 'null'}.")
    return data

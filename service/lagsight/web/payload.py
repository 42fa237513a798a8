"""Request bodies in: media type checks and JSON parsing, with clear 4xx answers."""
from __future__ import annotations

import json

import orjson
from flask import Request

from lagsight.problems import Problem, invalid

JSON_TYPES = ("application/json",)


def media_type(request: Request) -> str:
    """The body's media type, lower case, without parameters ("" when not given)."""
    raw = request.environ.get("CONTENT_TYPE")
    if raw == "application/json":  # the usual header, exactly: nothing to parse
        return raw
    return (request.mimetype or "").lower()


def is_json(request: Request) -> bool:
    media = media_type(request)
    return media in JSON_TYPES or media.endswith("+json")


def _stdlib_parse(body: bytes):
    """Second opinion for bodies orjson refuses: reads numbers beyond float range and
    NaN/Infinity literals so the schema can point at the element, and locates real syntax errors."""
    text = body.decode("utf-8")
    return json.loads(text, parse_constant=float)


def _has_lone_surrogate(data) -> bool:
    """True when a string holds an unpaired UTF-16 surrogate (legal as a JSON escape, not as text)."""
    stack = [data]
    while stack:
        item = stack.pop()
        if isinstance(item, str):
            try:
                item.encode("utf-8")
            except UnicodeEncodeError:
                return True
        elif isinstance(item, dict):
            stack.extend(item.keys())
            stack.extend(item.values())
        elif isinstance(item, list):
            stack.extend(v for v in item if isinstance(v, (str, list, dict)))
    return False


def read_body(request: Request) -> bytes:
    """The raw body, refused with 413 past the deployment's limit whether or not it came with a Content-Length.

    With a Content-Length werkzeug refuses an oversized body before reading it. Without one
    (chunked transfer) it stops reading at the limit and returns what it has, so one more
    byte is read from the server's stream to tell a body that ends at the limit from one that
    goes on: a truncated body must never be parsed as if it were whole.
    """
    body = request.get_data(cache=True)
    if request.content_length is None:
        limit = request.max_content_length
        if limit is not None and len(body) >= limit and request.environ["wsgi.input"].read(1):
            raise Problem("payload-too-large", f"The request body is larger than this deployment's limit of {limit} bytes.")
    return body


def read_json_object(request: Request) -> dict:
    """Parse the body as a JSON object, or raise a Problem (400, 413 or 415; 422 for a non-object)."""
    if not is_json(request):
        raise Problem(
            "unsupported-media-type",
            f"Send the body as application/json, or text/csv on /v1/diagnostics (got {request.mimetype or 'no Content-Type'}).",
        )
    body = read_body(request)
    if not body or body.isspace():
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
        if _has_lone_surrogate(data):  # orjson refuses these; the second opinion must too
            raise Problem("malformed-json", "The JSON has a string with an unpaired surrogate escape (such as \\ud800); "
                                            "send valid Unicode text.")
    if not isinstance(data, dict):
        raise invalid("", f"The body must be a JSON object, got a JSON {type(data).__name__ if data is not None else 'null'}.")
    return data

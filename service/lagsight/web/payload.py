"""Request bodies in: media type checks and JSON parsing, with clear 4xx answers."""
from __future__ import annotations

import json
import logging

import orjson
from flask import Request

from lagsight.problems import FieldError, Problem, invalid
from lagsight.web.observability import request_id

log = logging.getLogger("lagsight")

JSON_TYPES = ("application/json",)
_UTF8_BOM = b"\xef\xbb\xbf"
#: The json module's messages that speak of Python rather than of the text, said plainly.
_PLAIN_MESSAGES = {"Unexpected UTF-8 BOM (decode using utf-8-sig)": "a second byte-order mark (U+FEFF) before the JSON"}


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


#: Bytes asked of the server's input stream per read.
_STEP = 64 << 10
#: Where the body read once is kept for the rest of the request (see :func:`read_body`).
_BODY_KEY = "lagsight.body"


def _read_stream(stream, most: int) -> bytes:
    """Up to ``most`` bytes from the server's input stream, fewer only where the stream ends.

    An error raised by the stream itself is the transfer's fault, never the service's: gunicorn
    raises one for malformed chunked framing (a chunk size that is not hex, a chunk without its
    CRLF, a bad extension) and for a connection that ends inside a chunk. Its message can quote
    the caller's bytes, so neither the answer nor a log line repeats it.
    """
    parts, have = [], 0
    while have < most:
        try:
            part = stream.read(min(_STEP, most - have))
        except Exception as exc:  # any failure to read the body is a framing or transfer failure
            log.info("request body unreadable", extra={"request_id": request_id(), "exception": type(exc).__name__})
            raise _whole_body("bad-request", "The request body could not be read: its chunked transfer framing is "
                                             "malformed, or the connection ended inside it; send the whole body, "
                                             "well-formed.") from None
        if not part:
            break
        parts.append(part)
        have += len(part)
    return b"".join(parts)


def read_body(request: Request) -> bytes:
    """The raw body, read once and checked against the deployment's limit on every path.

    - With a Content-Length: over the limit is a 413 before a byte is read; a body that ends
      before the length it announced is a 400 (it is never parsed as if it were whole).
    - Without one (chunked transfer; the server marks such a stream as terminated): at most one
      byte past the limit is read, and a body that goes past it is a 413, so a truncated body
      is never parsed either. Malformed framing is a 400.
    - Neither (a server that cannot end the stream): no body.

    Every route reads its body here, JSON and CSV alike; the bytes are kept for the request.
    """
    environ = request.environ
    cached = environ.get(_BODY_KEY)
    if cached is not None:
        return cached
    limit = request.max_content_length
    length = request.content_length
    stream = environ["wsgi.input"]
    if length is not None:
        if limit is not None and length > limit:
            raise _too_large(limit)
        body = _read_stream(stream, length)
        if len(body) < length:
            raise _whole_body("bad-request", f"The request body ended after {len(body)} of the {length} "
                                             f"{'byte' if length == 1 else 'bytes'} its "
                                             "Content-Length announced; send the whole body.")
    elif environ.get("wsgi.input_terminated"):
        body = _read_stream(stream, limit + 1 if limit is not None else 1 << 62)
        if limit is not None and len(body) > limit:
            raise _too_large(limit)
    else:
        body = b""
    environ[_BODY_KEY] = body
    return body


def release_body(request: Request) -> None:
    """Forget the body kept by :func:`read_body` (a route that has parsed it and needs the bytes no longer):
    a large batch's bytes are then freed before its engine runs, not at the end of the request."""
    request.environ.pop(_BODY_KEY, None)


def _whole_body(kind: str, detail: str) -> Problem:
    """A problem with the body as a whole: its pointer is the root ("")."""
    return Problem(kind, detail, [FieldError("", detail)])


def _too_large(limit: int) -> Problem:
    return _whole_body("payload-too-large", f"The request body is larger than this deployment's limit of {limit} "
                                            "bytes; nothing was analysed. Send less data per request, or split a batch.")


def read_json_object(request: Request) -> dict:
    """Parse the body as a JSON object, or raise a Problem (400, 413 or 415; 422 for a non-object).

    A leading UTF-8 byte-order mark is skipped (what CSV bodies also allow): JSON must not carry one, but
    PowerShell 5 and other Windows tools write it, and refusing it helps no one. Other encodings
    (UTF-16, with or without a mark) are a 400 saying the body is not UTF-8.
    """
    if not is_json(request):
        raise Problem(
            "unsupported-media-type",
            f"Send the body as application/json, or text/csv on /v1/diagnostics (got {request.mimetype or 'no Content-Type'}).",
        )
    body = read_body(request)
    if body.startswith(_UTF8_BOM):  # RFC 8259 section 8.1 lets a parser ignore it; Windows tools write one
        body = body[len(_UTF8_BOM):]
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
            msg = _PLAIN_MESSAGES.get(err.msg, err.msg)
            raise Problem("malformed-json", f"Invalid JSON at line {err.lineno}, column {err.colno}: {msg}.") from None
        except ValueError:
            raise Problem("malformed-json", f"Invalid JSON: {first}.") from None
        if _has_lone_surrogate(data):  # orjson refuses these; the second opinion must too
            raise Problem("malformed-json", "The JSON has a string with an unpaired surrogate escape (such as \\ud800); "
                                            "send valid Unicode text.")
    if not isinstance(data, dict):
        raise invalid("", f"The body must be a JSON object, got a JSON {type(data).__name__ if data is not None else 'null'}.")
    return data

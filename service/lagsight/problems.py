"""One error shape for every failure: RFC 9457 problem details.

Every error the service returns is ``application/problem+json`` with
``type``, ``title``, ``status``, ``detail`` and ``instance``; validation
failures add ``errors``, a list of ``{"pointer", "detail"}`` where ``pointer``
is an RFC 6901 JSON pointer into the request body.
"""
from __future__ import annotations

import difflib
from dataclasses import dataclass, field

PROBLEM_MEDIA_TYPE = "application/problem+json"
TYPE_PREFIX = "urn:lagsight:problem:"

#: slug -> (status, title). The slugs are part of the contract (documented in the OpenAPI file).
KINDS = {
    "malformed-json": (400, "The request body is not valid JSON"),
    "malformed-csv": (400, "The request body is not a readable CSV table"),
    "bad-request": (400, "Bad request"),
    "unauthorized": (401, "Authentication required"),
    "not-found": (404, "No such resource"),
    "method-not-allowed": (405, "Method not allowed"),
    "not-acceptable": (406, "No acceptable representation"),
    "payload-too-large": (413, "The request is too large"),
    "unsupported-media-type": (415, "Unsupported media type"),
    "invalid-content": (422, "The request content is invalid"),
    "too-many-requests": (429, "Too many requests"),
    "internal-error": (500, "Internal error"),
    "unavailable": (503, "Service unavailable"),
    # answered by the HTTP server (gunicorn) before the request reaches the service; see server_errors.py
    "forbidden": (403, "Forbidden"),
    "uri-too-long": (414, "The request line is too long"),
    "expectation-failed": (417, "Expectation failed"),
    "headers-too-large": (431, "The request headers are too large"),
    "not-implemented": (501, "Not implemented"),
}


def escape_token(token) -> str:
    """Escape one JSON-pointer reference token (RFC 6901 section 3)."""
    return str(token).replace("~", "~0").replace("/", "~1")


def pointer(*tokens) -> str:
    """Build a JSON pointer from path tokens: pointer("values", 3) == "/values/3"."""
    return "".join("/" + escape_token(t) for t in tokens)


@dataclass
class FieldError:
    pointer: str
    detail: str
    line: int | None = None  # 1-based line of a text/csv body, when the error is in one
    column: int | None = None  # 1-based field number on that line

    def as_dict(self) -> dict:
        out = {"pointer": self.pointer, "detail": self.detail}
        if self.line is not None:
            out["line"] = self.line
            out["column"] = self.column
        return out

    def under(self, prefix: str) -> "FieldError":
        """The same error, its pointer moved below ``prefix`` (for batch items)."""
        return FieldError(prefix + self.pointer, self.detail, self.line, self.column)


@dataclass
class Problem(Exception):
    """An error to answer with; raise it anywhere below the views."""

    kind: str
    detail: str
    errors: list[FieldError] = field(default_factory=list)
    headers: dict = field(default_factory=dict)

    def __post_init__(self):
        if self.kind not in KINDS:
            raise ValueError(f"unknown problem kind {self.kind!r}")
        super().__init__(self.detail)

    @property
    def status(self) -> int:
        return KINDS[self.kind][0]

    def as_dict(self, instance: str | None = None) -> dict:
        status, title = KINDS[self.kind]
        body = {
            "type": TYPE_PREFIX + self.kind,
            "title": title,
            "status": status,
            "detail": self.detail,
            "instance": instance,
        }
        if self.errors:
            body["errors"] = [e.as_dict() for e in self.errors]
        return body


def invalid(pointer_: str, detail: str) -> Problem:
    """A 422 about one field."""
    return Problem("invalid-content", detail, [FieldError(pointer_, detail)])


def counted(n: int, one: str, many: str) -> str:
    """A count with the words that agree with it: ``counted(1, "field is", "fields are") == "1 field is"``."""
    return f"{n:,} {one if n == 1 else many}"


def did_you_mean(given, choices) -> str:
    """`` Did you mean 'x'?`` for the choice nearest to ``given`` (difflib's ratio, case ignored), else ""."""
    if not isinstance(given, str) or not given.strip():
        return ""
    names = {str(c).casefold(): str(c) for c in choices}
    close = difflib.get_close_matches(given.strip().casefold(), list(names), n=1, cutoff=0.6)
    return f" Did you mean {names[close[0]]!r}?" if close else ""


def flatten_messages(messages, prefix: str = "") -> list[FieldError]:
    """Turn marshmallow's nested error messages into pointer-keyed field errors."""
    out: list[FieldError] = []
    if isinstance(messages, dict):
        for key, value in messages.items():
            if key == "_schema":
                out.extend(flatten_messages(value, prefix))
            else:
                out.extend(flatten_messages(value, prefix + "/" + escape_token(key)))
    elif isinstance(messages, (list, tuple)):
        for item in messages:
            if isinstance(item, (dict, list, tuple)):
                out.extend(flatten_messages(item, prefix))
            else:
                out.append(FieldError(prefix, str(item)))
    else:
        out.append(FieldError(prefix, str(messages)))
    return out

"""gunicorn's own error answers in the service's problem+json shape.

Some requests never reach the application: a malformed request line, a request
line or headers over gunicorn's limits, an unsupported Expect or transfer coding.
gunicorn answers those itself with a small HTML page; installed by
``lagsight.serving.gunicorn_conf``, this module makes that answer the same RFC 9457
problem document (and the same basic security headers) as every other error.
"""
from __future__ import annotations

import orjson
from gunicorn import util

from lagsight.problems import KINDS, PROBLEM_MEDIA_TYPE, TYPE_PREFIX
from lagsight.version import __version__

_SLUG_BY_STATUS = {status: slug for slug, (status, _) in KINDS.items()}
_MAX_DETAIL = 300


def problem_bytes(status: int, reason: str, message: str) -> bytes:
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
    head = (
        f"HTTP/1.1 {status} {reason}\r\n"
        "Connection: close\r\n"
        f"Content-Type: {PROBLEM_MEDIA_TYPE}\r\n"
        f"Content-Length: {len(body)}\r\n"
        "X-Content-Type-Options: nosniff\r\n"
        "Cache-Control: no-store\r\n"
        f"X-Lagsight-Version: {__version__}\r\n"
        "\r\n"
    )
    return head.encode("latin-1") + body


def install() -> None:
    def write_problem(sock, status_int, reason, mesg):
        util.write_nonblock(sock, problem_bytes(int(status_int), str(reason), str(mesg)))

    util.write_error = write_problem

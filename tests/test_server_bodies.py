"""The body limit holds on every route and encoding, and a broken body is a 400, never a 500.

Routes and encodings: a JSON body and a text/csv body on /v1/diagnostics, a JSON batch answered
as JSON or streamed as NDJSON; each with a Content-Length and chunked (no length). Over the
limit is a 413 problem+json and nothing is analysed (the series counter does not move); a body
shorter than its Content-Length, and malformed chunked framing, are 400 problem+json. The
in-process tests build the WSGI environ a server would (gunicorn marks a chunked body's stream
as terminated and gives no CONTENT_LENGTH); the live tests send raw bytes to a real gunicorn.
"""
from __future__ import annotations

import io
import logging
import re
import socket

import orjson
import pytest
from werkzeug.test import EnvironBuilder
from werkzeug.wrappers import Request

from lagsight import create_app
from lagsight.web.observability import JsonFormatter

from .live_server import live_gunicorn
from .spec_tools import assert_valid

LIMIT = 2000
NDJSON = "application/x-ndjson"


def _csv(rows: int) -> bytes:
    return b"value\n" + b"".join(b"%d.25\n" % (i % 7) for i in range(rows))


def _json(points: int) -> bytes:
    return orjson.dumps({"values": [float(i % 7) for i in range(points)]})


def _batch(points: int) -> bytes:
    return orjson.dumps({"series": [{"id": "a", "values": [float(i % 5) for i in range(points)]}]})


#: (name, path, content type, Accept, a body of n bytes or a little more built from a size knob)
ROUTES = [
    ("json", "/v1/diagnostics", "application/json", None, _json),
    ("csv", "/v1/diagnostics", "text/csv", None, _csv),
    ("batch-json", "/v1/diagnostics/batch", "application/json", None, _batch),
    ("batch-ndjson", "/v1/diagnostics/batch", "application/json", NDJSON, _batch),
]


def _sized(build, low: int, high: int) -> bytes:
    """The largest body ``build`` makes within ``high`` bytes and over ``low`` (found by bisection)."""
    lo, hi = 1, 10_000
    while lo < hi:
        mid = (lo + hi + 1) // 2
        if len(build(mid)) <= high:
            lo = mid
        else:
            hi = mid - 1
    body = build(lo)
    assert low < len(body) <= high
    return body


@pytest.fixture(scope="module")
def app():
    return create_app({"TESTING": True, "MAX_BODY_BYTES": LIMIT})


def _series_analysed(client) -> float:
    text = client.get("/metrics").get_data(as_text=True)
    return float(re.search(r"^lagsight_series_analysed_total (\S+)$", text, re.M).group(1))


def _send(client, path: str, body: bytes, content_type: str, accept: str | None, length: int | None):
    """POST ``body``; ``length`` None sends it as a server passes on a chunked body (no CONTENT_LENGTH)."""
    environ = EnvironBuilder(path=path, method="POST", content_type=content_type,
                             headers={"Accept": accept} if accept else {}).get_environ()
    environ["wsgi.input"] = io.BytesIO(body)
    environ.pop("CONTENT_LENGTH", None)
    if length is None:
        environ["wsgi.input_terminated"] = True
    else:
        environ["CONTENT_LENGTH"] = str(length)
    return client.open(Request(environ))


def _problem(r, status: int) -> dict:
    assert r.status_code == status, (r.status_code, r.get_data()[:300])
    assert r.content_type == "application/problem+json"
    problem = r.get_json()
    assert_valid(problem, "Problem")
    assert problem["status"] == status and [e["pointer"] for e in problem["errors"]] == [""]
    return problem


@pytest.mark.parametrize("name,path,content_type,accept,build", ROUTES, ids=[r[0] for r in ROUTES])
@pytest.mark.parametrize("framing", ["content-length", "chunked"])
def test_over_the_limit_is_413_and_nothing_is_analysed(app, name, path, content_type, accept, build, framing):
    client = app.test_client()
    at_limit = _sized(build, LIMIT - 60, LIMIT)
    over = _sized(build, LIMIT, LIMIT + 60)
    before = _series_analysed(client)
    r = _send(client, path, over, content_type, accept, len(over) if framing == "content-length" else None)
    problem = _problem(r, 413)
    assert problem["type"] == "urn:lagsight:problem:payload-too-large" and f"{LIMIT} bytes" in problem["detail"]
    assert _series_analysed(client) == before
    ok = _send(client, path, at_limit, content_type, accept, len(at_limit) if framing == "content-length" else None)
    assert ok.status_code == 200, ok.get_data()[:300]
    assert _series_analysed(client) == before + 1


@pytest.mark.parametrize("name,path,content_type,accept,build", ROUTES, ids=[r[0] for r in ROUTES])
def test_a_body_shorter_than_its_content_length_is_400(app, name, path, content_type, accept, build):
    client = app.test_client()
    body = build(20)
    before = _series_analysed(client)
    problem = _problem(_send(client, path, body, content_type, accept, len(body) + 10), 400)
    assert problem["type"] == "urn:lagsight:problem:bad-request"
    assert f"after {len(body)} of the {len(body) + 10} bytes" in problem["detail"]
    assert _series_analysed(client) == before


class _BrokenStream(io.RawIOBase):
    """A server's input stream that fails part-way, as gunicorn's does on malformed chunked framing."""

    def __init__(self, first: bytes, error: Exception):
        self.first, self.error = first, error

    def readable(self):
        return True

    def read(self, size=-1):
        if self.first:
            out, self.first = self.first, b""
            return out
        raise self.error


def test_a_stream_that_fails_while_read_is_400_without_its_message(app):
    client = app.test_client()
    environ = EnvironBuilder(path="/v1/diagnostics", method="POST", content_type="text/csv").get_environ()
    environ.pop("CONTENT_LENGTH", None)
    environ["wsgi.input_terminated"] = True
    environ["wsgi.input"] = _BrokenStream(b"value\n1\n2\n", ValueError("chunk size 'CANARY-7431'"))
    stream = io.StringIO()
    handler = logging.StreamHandler(stream)
    handler.setFormatter(JsonFormatter())
    logging.getLogger("lagsight").addHandler(handler)
    try:
        r = client.open(Request(environ))
    finally:
        logging.getLogger("lagsight").removeHandler(handler)
    problem = _problem(r, 400)
    assert "chunked transfer framing" in problem["detail"] and "CANARY" not in problem["detail"]
    lines = [orjson.loads(line) for line in stream.getvalue().splitlines()]
    unreadable = [e for e in lines if e["message"] == "request body unreadable"]
    assert unreadable and unreadable[0]["exception"] == "ValueError"
    assert unreadable[0]["request_id"] == r.headers["X-Request-ID"]
    assert "CANARY" not in stream.getvalue()


# --- against a real gunicorn, raw bytes on a socket ---------------------------------------------------------


def _raw(base: str, data: bytes) -> bytes:
    host, port = base.removeprefix("http://").split(":")
    with socket.create_connection((host, int(port)), timeout=30) as s:
        s.sendall(data)
        s.shutdown(socket.SHUT_WR)
        out = b""
        while chunk := s.recv(65536):
            out += chunk
    return out


def _chunked(body: bytes, size: int = 500) -> bytes:
    pieces = [b"%x\r\n%s\r\n" % (len(body[i:i + size]), body[i:i + size]) for i in range(0, len(body), size)]
    return b"".join(pieces) + b"0\r\n\r\n"


def _head(path: str, content_type: str, accept: str | None, framing: bytes) -> bytes:
    extra = b"Accept: %s\r\n" % accept.encode() if accept else b""
    return (b"POST %s HTTP/1.1\r\nHost: test\r\nContent-Type: %s\r\n%s%s\r\n"
            % (path.encode(), content_type.encode(), extra, framing))


def _answer(raw: bytes) -> tuple[int, dict, bytes]:
    head, _, body = raw.partition(b"\r\n\r\n")
    status = int(head.split(b" ", 2)[1])
    return status, {k.lower(): v for k, _, v in (ln.partition(b": ") for ln in head.split(b"\r\n")[1:])}, body


def _live_problem(raw: bytes, status: int) -> dict:
    got, headers, body = _answer(raw)
    assert got == status, raw[:400]
    assert headers[b"content-type"] == b"application/problem+json" and b"x-request-id" in headers
    problem = orjson.loads(body)
    assert_valid(problem, "Problem")
    assert problem["status"] == status and [e["pointer"] for e in problem["errors"]] == [""]
    return problem


def _live_series_analysed(base: str) -> float:
    _, _, body = _answer(_raw(base, b"GET /metrics HTTP/1.1\r\nHost: test\r\n\r\n"))
    found = re.search(rb"^lagsight_series_analysed_total (\S+)$", body, re.M)
    return float(found.group(1)) if found else 0.0


@pytest.mark.slow
def test_limits_and_framing_against_a_live_gunicorn(tmp_path):
    with live_gunicorn(tmp_path, env={"LAGSIGHT_MAX_BODY_BYTES": str(LIMIT)}) as base:
        before = _live_series_analysed(base)
        for name, path, content_type, accept, build in ROUTES:
            over = _sized(build, LIMIT, LIMIT + 60)
            chunked = _live_problem(_raw(base, _head(path, content_type, accept, b"Transfer-Encoding: chunked\r\n")
                                         + _chunked(over)), 413)
            length = _live_problem(_raw(base, _head(path, content_type, accept, b"Content-Length: %d\r\n" % len(over))
                                        + over), 413)
            assert chunked["type"] == length["type"] == "urn:lagsight:problem:payload-too-large", name
            short = build(20)
            problem = _live_problem(_raw(base, _head(path, content_type, accept,
                                                     b"Content-Length: %d\r\n" % (len(short) + 10)) + short), 400)
            assert "Content-Length announced" in problem["detail"], name
        assert _live_series_analysed(base) == before  # nothing above was analysed

        good = _csv(10)
        broken = {  # chunked framing that gunicorn cannot read, each on a text/csv and a JSON body
            "size not hex": b"zz\r\n" + good + b"\r\n0\r\n\r\n",
            "no CRLF after the data": b"%x\r\n" % len(good) + good + b"XX0\r\n\r\n",
            "bad chunk extension": b"%x;=\r\n" % len(good) + good + b"\r\n0\r\n\r\n",
            "ends inside a chunk": b"%x\r\n" % (len(good) + 40) + good,
            "no last chunk": b"%x\r\n" % len(good) + good + b"\r\n",
            "no CRLF after the last chunk": b"%x\r\n" % len(good) + good + b"\r\n0\r\n",
        }
        for label, framing in broken.items():
            for content_type in ("text/csv", "application/json"):
                raw = _raw(base, _head("/v1/diagnostics", content_type, None, b"Transfer-Encoding: chunked\r\n") + framing)
                problem = _live_problem(raw, 400)
                assert problem["type"] == "urn:lagsight:problem:bad-request", (label, problem)
        assert _live_series_analysed(base) == before
        ok = _answer(_raw(base, _head("/v1/diagnostics", "text/csv", None, b"Transfer-Encoding: chunked\r\n")
                          + _chunked(good, 7)))
        assert ok[0] == 200 and orjson.loads(ok[2])["n"] == 10

"""Nothing a caller sends reaches a log line, and every answer looks like the service's own.

A live gunicorn (the production config, auth on, log level INFO) gets requests that carry one canary
value everywhere a caller can put bytes: the request line, header names and values, the method, the
path, the query, the token, the body (JSON, CSV, chunked framing), on paths that gunicorn answers
itself (400, 414, 417, 431, 501) and on every kind of answer from the application. Afterwards the
canary is nowhere in the server's log. The answers carry no ``Server`` header, gunicorn's own errors
carry the service's security headers and a request id that its log line carries too, and no path is
answered with a redirect built from the Host header.
"""
from __future__ import annotations

import json
import socket

import orjson
import pytest

from lagsight import create_app
from lagsight.web.security import data_headers

from .live_server import live_gunicorn
from .spec_tools import assert_valid

CANARY = "Qz7canaryXw"
TOKEN = "team-bakery-token"
AUTH = f"Authorization: Bearer {TOKEN}\r\n"


def _raw(base: str, data: bytes) -> bytes:
    host, port = base.removeprefix("http://").split(":")
    with socket.create_connection((host, int(port)), timeout=30) as s:
        s.sendall(data)
        try:
            s.shutdown(socket.SHUT_WR)
        except OSError:  # the server may already have answered and closed
            pass
        out = b""
        try:
            while chunk := s.recv(65536):
                out += chunk
        except ConnectionResetError:  # the server closed with our bytes unread; what arrived is the answer
            pass
    return out


def _split(raw: bytes) -> tuple[int, dict[str, str], bytes]:
    head, _, body = raw.partition(b"\r\n\r\n")
    lines = head.decode("latin-1").split("\r\n")
    headers = {}
    for line in lines[1:]:
        name, _, value = line.partition(": ")
        headers[name.lower()] = value
    return int(lines[0].split(" ", 2)[1]), headers, body


def _post(path: str, body: bytes, content_type: str = "application/json", extra: str = AUTH) -> bytes:
    return (f"POST {path} HTTP/1.1\r\nHost: test\r\nContent-Type: {content_type}\r\n{extra}"
            f"Content-Length: {len(body)}\r\n\r\n").encode() + body


C = CANARY.encode()
#: Requests gunicorn refuses before the application sees them, and the status it answers.
SERVER_LEVEL = [
    (b"GET /" + C + b" HTTP/1.1 " + C + b"\r\nHost: test\r\n\r\n", 400),  # invalid HTTP version
    (C + b"\r\n\r\n", 400),  # invalid request line
    (b"G<T /" + C + b" HTTP/1.1\r\nHost: test\r\n\r\n", 400),  # invalid method
    (b"GET /healthz HTTP/1.1\r\nHost: test\r\n" + C + b"(x): v\r\n\r\n", 400),  # invalid header name
    (b"GET /healthz HTTP/1.1\r\nHost: test\r\nX-Note: " + C + b"\x00\r\n\r\n", 400),  # invalid header value
    (b"GET /healthz HTTP/1.1\r\nHost: test\r\nX-Note: a\r\n " + C + b"\r\n\r\n", 400),  # obsolete line folding
    (b"GET /v1/diagnostics?values=" + C + b"," * 4100 + b" HTTP/1.1\r\nHost: test\r\n\r\n", 414),
    (b"GET /healthz HTTP/1.1\r\nHost: test\r\nX-Big: " + C * 900 + b"\r\n\r\n", 431),
    (b"POST /v1/diagnostics HTTP/1.1\r\nHost: test\r\nTransfer-Encoding: " + C + b"\r\n\r\n", 501),
    (b"POST /v1/diagnostics HTTP/1.1\r\nHost: test\r\nExpect: " + C + b"\r\nContent-Length: 2\r\n\r\n{}", 417),
]
#: Requests the application answers, each with the canary somewhere, and the status it answers.
APP_LEVEL = [
    (f"GET /v1/{CANARY} HTTP/1.1\r\nHost: test\r\n{AUTH}\r\n".encode(), 404),
    (f"GET /v1/diagnostics?values=1,2,3,4&{CANARY}=1 HTTP/1.1\r\nHost: test\r\n{AUTH}\r\n".encode(), 422),
    (f"GET /v1/diagnostics?values=1,2,{CANARY},4 HTTP/1.1\r\nHost: test\r\n{AUTH}\r\n".encode(), 422),
    (f"GET /v1/diagnostics?values=1,2,3,4&name={CANARY}&name=x HTTP/1.1\r\nHost: test\r\n{AUTH}\r\n".encode(), 400),
    (f"GET /v1/methods HTTP/1.1\r\nHost: test\r\nAuthorization: Bearer {CANARY}\r\n\r\n".encode(), 401),
    (f"GET /{CANARY} HTTP/1.1\r\nHost: test\r\nAuthorization: Bearer {CANARY}\r\n\r\n".encode(), 401),
    (f"{CANARY.upper()} /v1/diagnostics HTTP/1.1\r\nHost: test\r\n{AUTH}\r\n".encode(), 405),
    (f"GET /v1//methods HTTP/1.1\r\nHost: {CANARY}.example\r\n{AUTH}\r\n".encode(), 404),
    # gunicorn itself reads a request target of only slashes as /: the page, with no redirect
    (f"GET // HTTP/1.1\r\nHost: {CANARY}.example\r\n{AUTH}\r\n".encode(), 200),
    (f"GET /// HTTP/1.1\r\nHost: {CANARY}.example\r\n{AUTH}\r\n".encode(), 200),
    (f"GET /v1/methods HTTP/1.1\r\nHost: test\r\n{AUTH}User-Agent: {CANARY}\r\nReferer: http://{CANARY}/\r\n"
     f"Origin: http://{CANARY}\r\nX-Request-ID: {CANARY}<>\r\nX-{CANARY}: 1\r\n\r\n".encode(), 200),
    (_post("/v1/diagnostics", orjson.dumps({"values": [1, 3, 2, 5, 4, 6], "name": CANARY})), 200),
    (_post("/v1/diagnostics", b'{"values": [1, 2, "' + C + b'"]}'), 422),
    (_post("/v1/diagnostics", b'{"values": [1, 2, ' + C + b"]}"), 400),
    (_post("/v1/diagnostics", orjson.dumps({"values": [1, 2, 3, 4], CANARY: 1})), 422),
    (_post("/v1/diagnostics", b"value\n1\n2\n" + C + b"\n4\n", "text/csv"), 422),
    (_post("/v1/diagnostics", b"value\n1\n2\n\"" + C + b"\n", "text/csv"), 400),
    (_post("/v1/diagnostics", b"{}", f"text/{CANARY}"), 415),
    (_post("/v1/diagnostics", b'{"values": [1, 2, 3, 4]}', extra=AUTH + f"Accept: text/{CANARY}\r\n"), 406),
    (_post(f"/v1/diagnostics?format={CANARY}", b'{"values": [1, 2, 3, 4]}'), 422),
    (_post("/v1/diagnostics/batch", orjson.dumps({"series": [{"id": CANARY, "values": [1, 2, "x"]}]})), 200),
    (_post("/v1/diagnostics", b"{" * 40 + C), 400),
    (f"POST /v1/diagnostics HTTP/1.1\r\nHost: test\r\n{AUTH}Content-Type: text/csv\r\nTransfer-Encoding: chunked\r\n"
     f"\r\n{CANARY}\r\nvalue\r\n0\r\n\r\n".encode(), 400),  # a chunk size that is the canary
    (_post("/v1/diagnostics", b'{"values": [1, 2, 3, 4, 5, 6]}', extra=AUTH)[:-12], 400),  # shorter than its length
]


def _log_entries(tmp_path) -> tuple[str, list[dict]]:
    text = "".join(p.read_text(errors="replace") for p in tmp_path.glob("gunicorn-*.log"))
    return text, [json.loads(line) for line in text.splitlines() if line.startswith("{")]


@pytest.mark.slow
def test_no_caller_bytes_in_any_log_line_and_every_answer_in_the_service_shape(tmp_path):
    env = {"LAGSIGHT_AUTH_TOKENS": TOKEN, "LAGSIGHT_LOG_LEVEL": "INFO", "LAGSIGHT_FRAME_ANCESTORS": "'none'"}
    expected_headers = {k.lower(): v for k, v in data_headers("'none'")}
    with live_gunicorn(tmp_path, env=env) as base:
        server_ids = []
        for raw, status in SERVER_LEVEL:
            got, headers, body = _split(_raw(base, raw))
            assert got == status, raw[:80]
            assert "server" not in headers and headers["content-type"] == "application/problem+json"
            assert {k: headers.get(k) for k in expected_headers} == expected_headers, raw[:80]
            problem = orjson.loads(body)
            assert_valid(problem, "Problem")
            assert problem["status"] == status and CANARY.lower() not in body.decode("latin-1").lower()
            server_ids.append(headers["x-request-id"])
        for raw, status in APP_LEVEL:
            got, headers, body = _split(_raw(base, raw))
            assert got == status, (raw[:120], body[:300])
            assert "server" not in headers and "location" not in headers, raw[:80]
            if headers["content-type"].startswith("text/html"):  # the page sets its own CSP and caching
                assert "frame-ancestors 'none'" in headers["content-security-policy"]
                assert headers["x-content-type-options"] == "nosniff" and headers["x-frame-options"] == "DENY"
            else:
                assert {k: headers.get(k) for k in expected_headers} == expected_headers, raw[:80]
    text, entries = _log_entries(tmp_path)
    assert CANARY.lower() not in text.lower()
    assert "271828" not in text
    warnings = [e for e in entries if e["logger"] == "gunicorn.error" and e["level"] == "WARNING"]
    assert sorted(e.get("request_id") for e in warnings) == sorted(server_ids)  # each answer's id is on its line
    assert len(set(server_ids)) == len(server_ids)
    assert any(e["message"] == "rejected bearer token" and e["route"] == "(unmatched)" for e in entries)
    assert any(e.get("method") == "(other)" and e.get("status") == 405 for e in entries)


@pytest.mark.parametrize("path", ["/v1//methods", "//v1/methods", "//", "/v1/methods/", "/healthz/", "/v1//diagnostics",
                                  "/static//page.js"])
def test_no_path_is_answered_with_a_redirect(path):
    """werkzeug would redirect such paths with a Location built from the Host header; they are 404 problems."""
    client = create_app({"TESTING": True}).test_client()
    for method in ("GET", "POST"):
        r = client.open(path, method=method, headers={"Host": "elsewhere.example"})
        assert r.status_code == 404 and "Location" not in r.headers, (method, path, r.status_code)
        assert r.content_type == "application/problem+json"


def test_no_rule_can_redirect():
    """Only / ends in a slash, so no rule gets werkzeug's trailing-slash redirect, and slashes are never merged."""
    app = create_app({"TESTING": True})
    for rule in app.url_map.iter_rules():
        assert rule.rule == "/" or not rule.rule.endswith("/"), rule.rule
        assert rule.merge_slashes is False, rule.rule

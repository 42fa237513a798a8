"""gunicorn sends a response's header and single-piece body in one write (lagsight.serving.whole_response).

A worker killed between two writes would leave a proxy with a forwarded header and
no body; with one write there is nothing half-sent to forward (ops/failover.py
measures the effect under nginx).
"""
from __future__ import annotations

from types import SimpleNamespace

from gunicorn.config import Config
from gunicorn.http import wsgi

from lagsight.serving import whole_response


class RecordingSocket:
    def __init__(self):
        self.writes: list[bytes] = []

    def sendall(self, data):
        self.writes.append(bytes(data))


def _response(method="POST"):
    whole_response.install()
    req = SimpleNamespace(version=(1, 1), method=method, should_close=lambda: True, headers=[])
    sock = RecordingSocket()
    resp = wsgi.Response(req, sock, Config())
    return resp, sock


def test_header_and_body_leave_in_one_write():
    resp, sock = _response()
    body = b'{"n": 3}'
    resp.start_response("200 OK", [("Content-Type", "application/json"), ("Content-Length", str(len(body)))])
    resp.write(body)
    resp.close()
    assert len(sock.writes) == 1
    head, _, rest = sock.writes[0].partition(b"\r\n\r\n")
    assert head.startswith(b"HTTP/1.1 200 OK") and b"Content-Length: 8" in head and rest == body


def test_a_response_without_body_still_sends_its_header():
    resp, sock = _response("HEAD")
    resp.start_response("200 OK", [("Content-Type", "application/json"), ("Content-Length", "8")])
    resp.close()
    assert len(sock.writes) == 1 and sock.writes[0].startswith(b"HTTP/1.1 200 OK")


def test_later_body_pieces_follow_in_order():
    resp, sock = _response()
    resp.start_response("200 OK", [("Content-Type", "application/x-ndjson"), ("Content-Length", "6")])
    resp.write(b"abc")
    resp.write(b"def")
    resp.close()
    assert b"".join(sock.writes).endswith(b"\r\n\r\nabcdef") and len(sock.writes) == 2


def test_install_is_idempotent():
    whole_response.install()
    whole_response.install()
    assert wsgi.Response._lagsight_whole_response is True

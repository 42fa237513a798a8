"""Errors gunicorn answers itself (before the app sees the request) keep the problem+json shape."""
from __future__ import annotations

import socket

import orjson
import pytest

from lagsight.serving.server_errors import problem_bytes

from .live_server import live_gunicorn
from .spec_tools import assert_valid


def _raw(base: str, raw: bytes) -> bytes:
    host, port = base.removeprefix("http://").split(":")
    with socket.create_connection((host, int(port)), timeout=30) as s:
        s.sendall(raw)
        out = b""
        while chunk := s.recv(65536):
            out += chunk
    return out


def _problem(response: bytes) -> tuple[int, dict, bytes]:
    head, _, body = response.partition(b"\r\n\r\n")
    status = int(head.split(b" ", 2)[1])
    assert b"Content-Type: application/problem+json" in head and b"X-Content-Type-Options: nosniff" in head
    problem = orjson.loads(body)
    assert_valid(problem, "Problem")
    assert problem["status"] == status
    return status, problem, head


def test_problem_bytes_is_a_complete_response():
    status, problem, head = _problem(problem_bytes(431, "Request Header Fields Too Large", "x" * 1000))
    assert status == 431 and problem["type"] == "urn:lagsight:problem:headers-too-large"
    assert len(problem["detail"]) <= 300 and b"Content-Length: " in head


@pytest.mark.slow
def test_gunicorn_level_errors_are_problems(tmp_path):
    with live_gunicorn(tmp_path) as base:
        cases = [
            (b"GET /v1/diagnostics?values=" + b"1," * 3000 + b"2 HTTP/1.1\r\nHost: x\r\n\r\n", 414, "uri-too-long"),
            (b"NOT A REQUEST LINE\r\n\r\n", 400, "bad-request"),
            (b"GET /healthz HTTP/1.1\r\nHost: x\r\n" + b"".join(b"X-H%d: v\r\n" % i for i in range(200)) + b"\r\n",
             431, "headers-too-large"),
            (b"GET /healthz HTTP/1.1\r\nHost: x\r\nX-Big: " + b"v" * 9000 + b"\r\n\r\n", 431, "headers-too-large"),
        ]
        for raw, want_status, slug in cases:
            status, problem, _ = _problem(_raw(base, raw))
            assert (status, problem["type"]) == (want_status, "urn:lagsight:problem:" + slug), raw[:60]


@pytest.mark.slow
def test_a_worker_stopped_by_its_timeout_answers_503_with_the_request_id(tmp_path):
    """gunicorn aborts a worker that runs past LAGSIGHT_TIMEOUT; the caller gets a 503 problem with its request id
    (not a bare 500), the log says so with the same id, and the stop is counted."""
    import json
    import re

    import numpy as np
    import requests

    values = np.random.default_rng(4).standard_normal(5000).tolist()  # Monte Carlo over 5,000 points: seconds
    with live_gunicorn(tmp_path, env={"LAGSIGHT_TIMEOUT": "1"}) as base:
        r = requests.post(base + "/v1/diagnostics", json={"values": values, "p_values": "monte_carlo",
                                                          "replicates": 9999},
                          headers={"X-Request-ID": "slow-bakery-1"}, timeout=60)
        metrics_text = requests.get(base + "/metrics", timeout=30).text
    assert r.status_code == 503 and r.headers["Content-Type"] == "application/problem+json"
    assert r.headers["X-Request-ID"] == "slow-bakery-1" and "Server" not in r.headers
    problem = r.json()
    assert_valid(problem, "Problem")
    assert problem["type"] == "urn:lagsight:problem:unavailable" and "worker timeout" in problem["detail"]
    lines = [json.loads(line) for p in tmp_path.glob("gunicorn-*.log") for line in p.read_text().splitlines()
             if line.startswith("{")]
    assert any(e.get("request_id") == "slow-bakery-1" and "stopped" in e["message"] for e in lines)
    assert re.search(r'^lagsight_requests_stopped_total\{by="worker"\} 1\.0$', metrics_text, re.M)

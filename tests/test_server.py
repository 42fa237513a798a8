"""The real server: gunicorn on a free loopback port answers a real request."""
from __future__ import annotations

import signal
import socket
import subprocess
import sys
import time

import pytest
import requests


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.mark.slow
def test_gunicorn_serves_a_diagnosis(tmp_path):
    port = _free_port()
    log = open(tmp_path / "gunicorn.log", "wb")
    proc = subprocess.Popen(
        [sys.executable, "-m", "gunicorn", "lagsight.serving.wsgi:app", "--bind", f"127.0.0.1:{port}",
         "--workers", "1", "--no-control-socket"],
        stdout=subprocess.DEVNULL, stderr=log,
    )
    try:
        base = f"http://127.0.0.1:{port}"
        deadline = time.monotonic() + 60
        while True:
            try:
                if requests.get(base + "/healthz", timeout=2).status_code == 200:
                    break
            except (requests.ConnectionError, requests.Timeout):  # bound but the worker still booting
                pass
            assert proc.poll() is None, (tmp_path / "gunicorn.log").read_text()
            assert time.monotonic() < deadline, "gunicorn did not start within 60 s"
            time.sleep(0.2)
        r = requests.post(base + "/v1/diagnostics", json={"values": [10000001, 10000003, 10000002]}, timeout=10)
        assert r.status_code == 200
        assert r.json()["acf"]["values"][0] == pytest.approx(-0.5)
        bad = requests.post(base + "/v1/diagnostics", data="{", headers={"content-type": "application/json"}, timeout=10)
        assert bad.status_code == 400 and bad.headers["content-type"] == "application/problem+json"
    finally:
        proc.send_signal(signal.SIGTERM)
        proc.wait(timeout=30)
        log.close()


@pytest.mark.slow
def test_gunicorn_recycles_a_worker_after_max_requests(tmp_path):
    """LAGSIGHT_MAX_REQUESTS reaches gunicorn: the one worker is replaced after its requests, and no caller notices."""
    import json

    from .live_server import live_gunicorn

    with live_gunicorn(tmp_path, env={"LAGSIGHT_MAX_REQUESTS": "3"}) as base:
        statuses = [requests.get(base + "/healthz", timeout=30).status_code for _ in range(8)]
    assert statuses == [200] * 8
    lines = [json.loads(line) for path in tmp_path.glob("gunicorn-*.log")
             for line in path.read_text().splitlines() if line.startswith("{")]
    assert sum(e["message"] == "Autorestarting worker after current request." for e in lines) >= 2
    assert len({e["pid"] for e in lines if e.get("route") == "/healthz"}) >= 3  # 3 requests each (jitter 3 // 10 = 0)

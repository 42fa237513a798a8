"""A real gunicorn serving lagsight on a free loopback port, for tests that call it over HTTP."""
from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from contextlib import contextmanager
from pathlib import Path

import requests


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@contextmanager
def gunicorn(log_path: Path, workers: int = 2, env: dict | None = None, start_timeout: float = 60.0):
    """Start gunicorn on 127.0.0.1:<free port>, wait for /healthz, yield the base URL, stop it with SIGTERM."""
    port = free_port()
    log = open(log_path, "wb")
    proc = subprocess.Popen(
        [sys.executable, "-m", "gunicorn", "lagsight.wsgi:app", "--bind", f"127.0.0.1:{port}",
         "--workers", str(workers), "--no-control-socket", "--timeout", "60"],
        stdout=subprocess.DEVNULL, stderr=log, env={**os.environ, **(env or {})},
    )
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + start_timeout
        while True:
            try:
                if requests.get(base + "/healthz", timeout=2).status_code == 200:
                    break
            except (requests.ConnectionError, requests.Timeout):
                pass
            if proc.poll() is not None or time.monotonic() > deadline:
                raise RuntimeError("gunicorn did not start:\n" + log_path.read_text(errors="replace"))
            time.sleep(0.2)
        yield base
    finally:
        proc.send_signal(signal.SIGTERM)
        try:
            proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait(timeout=10)
        log.close()

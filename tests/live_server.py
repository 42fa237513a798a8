"""Start a real gunicorn (the production config file) on a free loopback port for a test."""
from __future__ import annotations

import contextlib
import os
import signal
import socket
import subprocess
import sys
import time

import requests


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@contextlib.contextmanager
def live_gunicorn(tmp_path, env: dict | None = None, workers: int = 1, start_timeout: float = 60.0):
    """Yield the base URL of gunicorn -c python:lagsight.gunicorn_conf on 127.0.0.1; stop it with SIGTERM."""
    port = free_port()
    environ = {**os.environ, "LAGSIGHT_HOST": "127.0.0.1", "LAGSIGHT_PORT": str(port),
               "LAGSIGHT_WORKERS": str(workers), **(env or {})}
    environ.pop("PROMETHEUS_MULTIPROC_DIR", None)
    log_path = tmp_path / f"gunicorn-{port}.log"
    with open(log_path, "wb") as log:
        proc = subprocess.Popen([sys.executable, "-m", "gunicorn", "-c", "python:lagsight.gunicorn_conf", "lagsight.wsgi:app"],
                                stdout=log, stderr=log, env=environ)
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + start_timeout
        while True:
            try:
                if requests.get(base + "/readyz", timeout=2).status_code == 200:
                    break
            except requests.ConnectionError:
                pass
            assert proc.poll() is None, log_path.read_text()
            assert time.monotonic() < deadline, f"gunicorn did not become ready in {start_timeout} s"
            time.sleep(0.2)
        yield base
        assert proc.poll() is None, "gunicorn died during the test:\n" + log_path.read_text()[-3000:]
    finally:
        if proc.poll() is None:
            proc.send_signal(signal.SIGTERM)
            try:
                proc.wait(timeout=30)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()

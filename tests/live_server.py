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


def _stop(proc: subprocess.Popen) -> None:
    if proc.poll() is None:
        proc.send_signal(signal.SIGTERM)
        try:
            proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait(timeout=10)


@contextmanager
def _serve(cmd: list[str], env: dict, log_path: Path, port: int, probe: str, start_timeout: float,
           stdout_to_log: bool):
    """Run a server command, wait until GET <probe> answers 200, yield the base URL, stop it with SIGTERM."""
    with open(log_path, "wb") as log:
        proc = subprocess.Popen(cmd, stdout=log if stdout_to_log else subprocess.DEVNULL, stderr=log, env=env)
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + start_timeout
        while True:
            try:
                if requests.get(base + probe, timeout=2).status_code == 200:
                    break
            except (requests.ConnectionError, requests.Timeout):  # listening, worker still importing
                pass
            if proc.poll() is not None or time.monotonic() > deadline:
                raise RuntimeError(f"gunicorn did not answer {probe}:\n" + log_path.read_text(errors="replace"))
            time.sleep(0.2)
        yield base, proc
    finally:
        _stop(proc)


@contextmanager
def gunicorn(log_path: Path, workers: int = 2, env: dict | None = None, start_timeout: float = 60.0):
    """Start gunicorn on 127.0.0.1:<free port>, wait for /healthz, yield the base URL, stop it with SIGTERM."""
    port = free_port()
    cmd = [sys.executable, "-m", "gunicorn", "lagsight.serving.wsgi:app", "--bind", f"127.0.0.1:{port}",
           "--workers", str(workers), "--no-control-socket", "--timeout", "60"]
    with _serve(cmd, {**os.environ, **(env or {})}, log_path, port, "/healthz", start_timeout, False) as (base, _):
        yield base


@contextmanager
def live_gunicorn(tmp_path: Path, env: dict | None = None, workers: int = 1, start_timeout: float = 60.0):
    """Like :func:`gunicorn`, but with the production config file (lagsight.serving.gunicorn_conf, LAGSIGHT_* settings),
    ready only when /readyz passes, and failing the test if the server died while it ran."""
    port = free_port()
    environ = {**os.environ, "LAGSIGHT_HOST": "127.0.0.1", "LAGSIGHT_PORT": str(port),
               "LAGSIGHT_WORKERS": str(workers), **(env or {})}
    environ.pop("PROMETHEUS_MULTIPROC_DIR", None)
    log_path = tmp_path / f"gunicorn-{port}.log"
    cmd = [sys.executable, "-m", "gunicorn", "-c", "python:lagsight.serving.gunicorn_conf", "lagsight.serving.wsgi:app"]
    with _serve(cmd, environ, log_path, port, "/readyz", start_timeout, True) as (base, proc):
        yield base
        assert proc.poll() is None, "gunicorn died during the test:\n" + log_path.read_text(errors="replace")[-3000:]

"""Shared pieces of the load and fault scripts: servers on loopback, process facts, a bounded load generator.

Everything here talks to 127.0.0.1 only, and every loop is bounded by a count
and a deadline.
"""
from __future__ import annotations

import http.client
import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PAYLOAD = ROOT / "demo_payloads" / "bakery_daily_residuals.json"
LOOPBACK = "127.0.0.1"


def free_port() -> int:
    with socket.socket() as s:
        s.bind((LOOPBACK, 0))
        return s.getsockname()[1]


def ensure_tool(name: str, package: str) -> str:
    """The path of a system tool, installed non-interactively with apt-get when missing."""
    path = shutil.which(name) or (f"/usr/sbin/{name}" if os.path.exists(f"/usr/sbin/{name}") else None)
    if path:
        return path
    env = {**os.environ, "DEBIAN_FRONTEND": "noninteractive"}
    subprocess.run(["apt-get", "install", "-y", "-qq", package], check=True, env=env, stdout=subprocess.DEVNULL)
    return shutil.which(name) or f"/usr/sbin/{name}"


def payload(points: int | None = None) -> bytes:
    """The bakery demo payload, or a longer invented series (seeded AR(1) residuals of a call-centre model)."""
    if not points:
        return PAYLOAD.read_bytes()
    import numpy as np

    rng = np.random.default_rng(20261202)
    e = rng.standard_normal(points)
    x = np.empty(points)
    x[0] = e[0]
    for t in range(1, points):
        x[t] = 0.2 * x[t - 1] + e[t]
    return json.dumps({"name": "call centre minute wait residuals (invented)", "values": np.round(x, 4).tolist(),
                       "period": 60}).encode()


def get(port: int, path: str, timeout: float = 5.0) -> int:
    conn = http.client.HTTPConnection(LOOPBACK, port, timeout=timeout)
    try:
        conn.request("GET", path)
        return conn.getresponse().status
    finally:
        conn.close()


def wait_ready(port: int, deadline_s: float = 60.0) -> None:
    end = time.monotonic() + deadline_s
    while time.monotonic() < end:
        try:
            if get(port, "/readyz", 2.0) == 200:
                return
        except OSError:
            pass
        time.sleep(0.1)
    raise RuntimeError(f"nothing ready on port {port} after {deadline_s} s")


def start_gunicorn(port: int, workers: int, log_path: Path, env: dict | None = None) -> subprocess.Popen:
    """gunicorn with the production config file (lagsight.serving.gunicorn_conf) on 127.0.0.1:port, in its own process group."""
    environ = {**os.environ, "LAGSIGHT_HOST": LOOPBACK, "LAGSIGHT_PORT": str(port), "LAGSIGHT_WORKERS": str(workers),
               **(env or {})}
    environ.pop("PROMETHEUS_MULTIPROC_DIR", None)
    log = open(log_path, "ab")
    proc = subprocess.Popen(
        [sys.executable, "-m", "gunicorn", "-c", "python:lagsight.serving.gunicorn_conf", "lagsight.serving.wsgi:app"],
        stdout=log, stderr=log, env=environ, start_new_session=True,
    )
    log.close()
    wait_ready(port)
    return proc


def stop(proc: subprocess.Popen, sig: int = signal.SIGTERM, timeout: float = 40.0) -> None:
    if proc.poll() is None:
        proc.send_signal(sig)
        try:
            proc.wait(timeout=timeout)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()


def children(pid: int) -> list[int]:
    try:
        return [int(p) for p in Path(f"/proc/{pid}/task/{pid}/children").read_text().split()]
    except OSError:
        return []


def rss_kib(pid: int) -> int:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1])
    return 0


@dataclass
class Outcome:
    start: float
    end: float
    status: int | None  # None: connection error or timeout
    error: str | None = None


@dataclass
class LoadResult:
    outcomes: list[Outcome] = field(default_factory=list)

    def errors(self) -> list[Outcome]:
        return [o for o in self.outcomes if o.status is None or o.status >= 500]

    def summary(self) -> dict:
        n = len(self.outcomes)
        errs = self.errors()
        lat = sorted(o.end - o.start for o in self.outcomes if o.status is not None)
        span = (max(o.end for o in self.outcomes) - min(o.start for o in self.outcomes)) if n else 0.0
        kinds: dict[str, int] = {}
        for o in errs:
            key = o.error or f"HTTP {o.status}"
            kinds[key] = kinds.get(key, 0) + 1
        return {
            "requests": n, "errors": len(errs), "error_rate": round(len(errs) / n, 6) if n else None,
            "error_kinds": kinds, "throughput_rps": round(n / span, 1) if span else None,
            "p50_ms": round(1000 * lat[len(lat) // 2], 2) if lat else None,
            "p99_ms": round(1000 * lat[int(len(lat) * 0.99)], 2) if lat else None,
        }


def run_load(port: int, seconds: float, threads: int, body: bytes, max_requests: int = 200_000,
             path: str = "/v1/diagnostics", timeout: float = 30.0) -> LoadResult:
    """POST ``body`` from ``threads`` threads until ``seconds`` pass or ``max_requests`` are sent (loopback only)."""
    result = LoadResult()
    lock = threading.Lock()
    deadline = time.monotonic() + seconds
    sent = [0]

    def worker():
        while time.monotonic() < deadline:
            with lock:
                if sent[0] >= max_requests:
                    return
                sent[0] += 1
            t0 = time.monotonic()
            conn = http.client.HTTPConnection(LOOPBACK, port, timeout=timeout)
            try:
                conn.request("POST", path, body=body, headers={"Content-Type": "application/json"})
                resp = conn.getresponse()
                resp.read()
                out = Outcome(t0, time.monotonic(), resp.status)
            except (OSError, http.client.HTTPException) as err:
                out = Outcome(t0, time.monotonic(), None, type(err).__name__)
                time.sleep(0.01)  # no tight loop against a closed port
            finally:
                conn.close()
            with lock:
                result.outcomes.append(out)

    pool = [threading.Thread(target=worker, daemon=True) for _ in range(threads)]
    for t in pool:
        t.start()
    for t in pool:
        t.join(timeout=seconds + timeout + 5)
    return result


def write_result(name: str, data: dict) -> Path:
    data = {**data, "recorded_at": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
            "host_loadavg_1m_at_end": round(os.getloadavg()[0], 2), "host_cores": os.cpu_count()}
    out = ROOT / "ops" / "results" / f"{name}.json"
    out.parent.mkdir(exist_ok=True)
    out.write_text(json.dumps(data, indent=2) + "\n")
    return out

"""Load generators for loopback: wrk when installed, else a bounded Python one."""
from __future__ import annotations

import http.client
import re
import shutil
import statistics
import subprocess
import tempfile
import threading
import time
from pathlib import Path

_LUA = """wrk.method = "POST"
wrk.headers["Content-Type"] = "application/json"
local f = io.open("{path}", "rb")
wrk.body = f:read("*a")
f:close()
"""

_UNITS = {"us": 1e-6, "ms": 1e-3, "s": 1.0, "m": 60.0}


def _duration(text: str) -> float:
    m = re.fullmatch(r"([\d.]+)(us|ms|s|m)", text)
    return float(m.group(1)) * _UNITS[m.group(2)]


def wrk(url: str, body: bytes, seconds: int, connections: int, threads: int) -> dict:
    """requests/s and latency percentiles from ``wrk --latency`` (bounded by ``seconds``)."""
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "body.json"
        path.write_bytes(body)
        script = Path(tmp) / "post.lua"
        script.write_text(_LUA.format(path=path))
        out = subprocess.run(["wrk", f"-t{threads}", f"-c{connections}", f"-d{seconds}s", "--latency",
                              "-s", str(script), url], capture_output=True, text=True, timeout=seconds + 60).stdout
    rps = float(re.search(r"Requests/sec:\s+([\d.]+)", out).group(1))
    pct = {p: _duration(v) for p, v in re.findall(r"^\s+(50|75|90|99)%\s+(\S+)", out, re.M)}
    bad = re.search(r"Non-2xx or 3xx responses:\s+(\d+)", out)
    errors = re.search(r"Socket errors: (.*)", out)
    return {"tool": "wrk", "rps": rps, "p50": pct.get("50"), "p99": pct.get("99"),
            "non_2xx": int(bad.group(1)) if bad else 0, "socket_errors": errors.group(1) if errors else None}


def python_load(host: str, port: int, path: str, body: bytes, seconds: float, connections: int,
                max_requests: int = 200_000) -> dict:
    """A bounded closed-loop generator: ``connections`` threads, each sending one request at a time."""
    latencies: list[float] = []
    statuses: list[int] = []
    lock = threading.Lock()
    stop = time.monotonic() + seconds

    def client():
        own, codes = [], []
        while time.monotonic() < stop and len(own) < max_requests // connections:
            start = time.perf_counter()
            conn = http.client.HTTPConnection(host, port, timeout=30)
            conn.request("POST", path, body=body, headers={"Content-Type": "application/json"})
            resp = conn.getresponse()
            resp.read()
            conn.close()
            own.append(time.perf_counter() - start)
            codes.append(resp.status)
        with lock:
            latencies.extend(own)
            statuses.extend(codes)

    started = time.monotonic()
    workers = [threading.Thread(target=client) for _ in range(connections)]
    for w in workers:
        w.start()
    for w in workers:
        w.join()
    elapsed = time.monotonic() - started
    latencies.sort()
    p99 = latencies[min(len(latencies) - 1, int(0.99 * len(latencies)))] if latencies else None
    return {"tool": "python", "rps": len(latencies) / elapsed, "p50": statistics.median(latencies) if latencies else None,
            "p99": p99, "non_2xx": sum(1 for s in statuses if s >= 300), "socket_errors": None}


def available_tool(prefer: str = "wrk") -> str:
    return "wrk" if prefer == "wrk" and shutil.which("wrk") else "python"

"""Slow clients: 50 connections that send their headers one byte a second, while a normal client measures.

    .venv/bin/python -m ops.fault_slow_headers [--clients 50] [--seconds 30] [--workers 2] [--layout both]

For each layout (``nginx``: the supported one, ops/nginx/lagsight.conf.template in front of gunicorn;
``gunicorn``: gunicorn alone, as ``make serve`` runs it for local use) the script starts the service on
loopback with --workers sync workers, measures a normal client alone for a few seconds (the baseline), then
opens --clients connections that each send a request's header one byte a second and never finish it (a closed
connection is opened again, so the pressure lasts the whole run). Meanwhile the normal client sends the
bakery demo payload to POST /v1/diagnostics every 0.25 s (5 s timeout each) and records status and latency.

Pass (the supported layout): every request of the normal client answered 200 while the slow clients are
connected. gunicorn alone is measured to show why it is not the supported layout: its sync workers each
block on one slow connection. Writes ops/results/fault_slow_headers.json.
"""
from __future__ import annotations

import argparse
import http.client
import json
import os
import signal
import socket
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

from . import lib
from .failover import TEMPLATE, render

#: A header that is never finished: the slow client runs out of time before it runs out of bytes.
SLOW_HEAD = (b"POST /v1/diagnostics HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: application/json\r\n"
             b"X-Slow: " + b"z" * 400)


def _slow_client(port: int, stop_at: float, stats: dict, lock: threading.Lock) -> None:
    """Send SLOW_HEAD one byte a second until stop_at; open a new connection whenever the server closes one."""
    while time.monotonic() < stop_at:
        try:
            sock = socket.create_connection((lib.LOOPBACK, port), timeout=5)
        except OSError:
            with lock:
                stats["connect_failures"] += 1
            time.sleep(1.0)
            continue
        opened = time.monotonic()
        with lock:
            stats["connections"] += 1
        try:
            for i in range(len(SLOW_HEAD)):
                if time.monotonic() >= stop_at:
                    break
                sock.sendall(SLOW_HEAD[i:i + 1])
                time.sleep(1.0)
        except OSError:
            with lock:
                stats["closed_by_server"] += 1
                stats["held_s"].append(round(time.monotonic() - opened, 1))
        finally:
            sock.close()


def _normal_client(port: int, seconds: float, body: bytes) -> list[dict]:
    """POST the demo payload every 0.25 s for ``seconds``; each attempt has 5 s."""
    out = []
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        t0 = time.monotonic()
        conn = http.client.HTTPConnection(lib.LOOPBACK, port, timeout=5.0)
        try:
            conn.request("POST", "/v1/diagnostics", body=body, headers={"Content-Type": "application/json"})
            resp = conn.getresponse()
            resp.read()
            out.append({"status": resp.status, "s": time.monotonic() - t0})
        except (OSError, http.client.HTTPException) as err:
            out.append({"status": None, "error": type(err).__name__, "s": time.monotonic() - t0})
        finally:
            conn.close()
        time.sleep(max(0.0, 0.25 - (time.monotonic() - t0)))
    return out


def _summary(outcomes: list[dict]) -> dict:
    ok = [o["s"] for o in outcomes if o["status"] == 200]
    lat = sorted(ok)
    kinds: dict[str, int] = {}
    for o in outcomes:
        key = str(o["status"]) if o["status"] else o["error"]
        kinds[key] = kinds.get(key, 0) + 1
    pick = (lambda q: round(1000 * lat[min(len(lat) - 1, int(q * len(lat)))], 1)) if lat else (lambda q: None)
    return {"requests": len(outcomes), "answered_200": len(ok), "outcomes": kinds,
            "success_rate": round(len(ok) / len(outcomes), 4) if outcomes else None,
            "p50_ms": pick(0.5), "p95_ms": pick(0.95), "max_ms": round(1000 * lat[-1], 1) if lat else None}


def run_layout(layout: str, clients: int, seconds: float, workers: int, run_dir: Path) -> dict:
    port = lib.free_port()
    server = lib.start_gunicorn(port, workers, run_dir / f"{layout}-gunicorn.log")
    target, nginx_pid = port, None
    try:
        if layout == "nginx":
            nginx = lib.ensure_tool("nginx", "nginx")
            nginx_dir = run_dir / "nginx"
            nginx_dir.mkdir()
            target = lib.free_port()
            conf = render(nginx_dir, target, [port])
            subprocess.run([nginx, "-e", str(nginx_dir / "error.log"), "-c", str(conf)], check=True)
            lib.wait_ready(target)
            nginx_pid = int((nginx_dir / "nginx.pid").read_text().strip())
        body = lib.payload()
        baseline = _normal_client(target, 3.0, body)
        stats = {"connections": 0, "connect_failures": 0, "closed_by_server": 0, "held_s": []}
        lock = threading.Lock()
        stop_at = time.monotonic() + seconds
        slow = [threading.Thread(target=_slow_client, args=(target, stop_at, stats, lock), daemon=True)
                for _ in range(clients)]
        for t in slow:
            t.start()
        time.sleep(1.0)  # every slow client has connected and started its header
        under = _normal_client(target, seconds - 1.0, body)
        for t in slow:
            t.join(timeout=10)
        held = sorted(stats.pop("held_s"))
        return {"layout": layout, "workers": workers, "slow_clients": clients, "seconds": seconds,
                "baseline": _summary(baseline), "under_slow_clients": _summary(under),
                "slow_connections": {**stats, "held_before_server_closed_s_median": held[len(held) // 2] if held
                                     else None},
                "worker_restarts_logged": _timeouts(run_dir / f"{layout}-gunicorn.log")}
    finally:
        if nginx_pid:
            os.kill(nginx_pid, signal.SIGQUIT)
        lib.stop(server)


def _timeouts(log: Path) -> int:
    text = log.read_text(errors="replace") if log.exists() else ""
    return sum(1 for line in text.splitlines() if "WORKER TIMEOUT" in line)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--clients", type=int, default=50)
    ap.add_argument("--seconds", type=float, default=30.0)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--layout", choices=["both", "nginx", "gunicorn"], default="both")
    ns = ap.parse_args(argv)
    run_dir = Path(tempfile.mkdtemp(prefix="lagsight-slow-"))
    layouts = ["nginx", "gunicorn"] if ns.layout == "both" else [ns.layout]
    result = {"command": f"python -m ops.fault_slow_headers --clients {ns.clients} --seconds {ns.seconds:g} "
                         f"--workers {ns.workers} --layout {ns.layout}",
              "nginx_config": str(TEMPLATE.relative_to(lib.ROOT)),
              "layouts": [run_layout(name, ns.clients, ns.seconds, ns.workers, run_dir) for name in layouts]}
    supported = next((r for r in result["layouts"] if r["layout"] == "nginx"), None)
    result["pass"] = bool(supported) and supported["under_slow_clients"]["success_rate"] == 1.0
    print(json.dumps(result, indent=2))
    lib.write_result("fault_slow_headers", result)
    return 0 if result["pass"] or ns.layout == "gunicorn" else 1


if __name__ == "__main__":
    sys.exit(main())

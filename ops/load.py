"""Sustained load: wrk for 60 s at 64 connections on loopback, zero errors, worker memory growth under 10%.

    .venv/bin/python -m ops.load [--seconds 60] [--connections 64] [--workers N]

Starts gunicorn with the production config (default worker count for this
machine), warms it up for 10 s, notes each worker's resident memory, runs the
measured wrk pass, notes memory again and checks that the same workers served
throughout. Writes ops/results/load.json.
"""
from __future__ import annotations

import argparse
import json
import os
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from lagsight.config import default_workers

from . import lib


def wrk(wrk_bin: str, port: int, seconds: int, connections: int, threads: int = 2) -> dict:
    env = {**os.environ, "LAGSIGHT_PAYLOAD": str(lib.PAYLOAD)}
    out = subprocess.run(
        [wrk_bin, f"-t{threads}", f"-c{connections}", f"-d{seconds}s", "--timeout", "10s", "--latency",
         "-s", str(Path(__file__).with_name("wrk_post.lua")), f"http://{lib.LOOPBACK}:{port}/v1/diagnostics"],
        capture_output=True, text=True, env=env, timeout=seconds + 60, check=True,
    ).stdout
    return json.loads(re.search(r"WRK_JSON (\{.*\})", out).group(1))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=int, default=60)
    ap.add_argument("--connections", type=int, default=64)
    ap.add_argument("--warmup", type=int, default=10)
    ap.add_argument("--workers", type=int, default=default_workers())
    ns = ap.parse_args(argv)
    wrk_bin = lib.ensure_tool("wrk", "wrk")
    port = lib.free_port()
    log = Path(tempfile.mkdtemp(prefix="lagsight-load-")) / "gunicorn.log"
    # No recycling (LAGSIGHT_MAX_REQUESTS=0): the run measures how the same workers' memory grows under load.
    server = lib.start_gunicorn(port, ns.workers, log,
                                env={"LAGSIGHT_LOG_LEVEL": "WARNING", "LAGSIGHT_MAX_REQUESTS": "0"})
    try:
        warm = wrk(wrk_bin, port, ns.warmup, ns.connections)
        pids = sorted(lib.children(server.pid))
        before = {pid: lib.rss_kib(pid) for pid in pids}
        run = wrk(wrk_bin, port, ns.seconds, ns.connections)
        time.sleep(0.5)
        after_pids = sorted(lib.children(server.pid))
        after = {pid: lib.rss_kib(pid) for pid in after_pids}
    finally:
        lib.stop(server)
    growth = {str(pid): round(100.0 * (after.get(pid, 0) - before[pid]) / before[pid], 2) for pid in pids}
    total_before, total_after = sum(before.values()), sum(after.get(p, 0) for p in pids)
    errors = run["connect_errors"] + run["read_errors"] + run["write_errors"] + run["non_2xx_3xx"] + run["timeouts"]
    result = {
        "command": f"python -m ops.load --seconds {ns.seconds} --connections {ns.connections} --workers {ns.workers}",
        "machine": {"cores": os.cpu_count(), "python": sys.version.split()[0]},
        "workers": ns.workers, "connections": ns.connections, "payload": lib.PAYLOAD.name,
        "warmup": warm, "run": run, "throughput_rps": round(run["requests"] / run["duration_s"], 1),
        "errors": errors,
        "worker_rss_kib_before": before, "worker_rss_kib_after": after,
        "worker_rss_growth_percent": growth,
        "total_rss_growth_percent": round(100.0 * (total_after - total_before) / total_before, 2),
        "same_workers_throughout": pids == after_pids,
    }
    result["pass"] = (errors == 0 and result["same_workers_throughout"]
                      and all(g < 10.0 for g in growth.values()))
    print(json.dumps(result, indent=2))
    lib.write_result("load", result)
    return 0 if result["pass"] else 1


if __name__ == "__main__":
    sys.exit(main())

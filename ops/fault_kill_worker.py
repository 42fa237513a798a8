"""Workers killed with SIGKILL under load: error rate and recovery time.

    .venv/bin/python -m ops.fault_kill_worker [--seconds 30] [--threads 16] [--workers 2] [--kills 5] [--points 20000]

A bounded load (threads posting an invented series of --points values on
loopback, so that workers are busy most of the time) runs against gunicorn;
--kills times, evenly spaced, one busy worker gets SIGKILL. A request in flight
on the killed worker loses its connection: that is the error we count. For each
kill we report the time until the master has forked a replacement and the time
until the replacement answered its first request (recovery time).
Writes ops/results/fault_kill_worker.json.
"""
from __future__ import annotations

import argparse
import json
import os
import signal
import sys
import tempfile
import threading
import time
from datetime import datetime
from pathlib import Path

from . import lib


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=30.0)
    ap.add_argument("--threads", type=int, default=16)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--kills", type=int, default=5)
    ap.add_argument("--points", type=int, default=20000)
    ns = ap.parse_args(argv)
    port = lib.free_port()
    log = Path(tempfile.mkdtemp(prefix="lagsight-kill-")) / "gunicorn.log"
    # No recycling (LAGSIGHT_MAX_REQUESTS=0): every new worker pid is then a replacement for a killed one.
    server = lib.start_gunicorn(port, ns.workers, log,
                                env={"LAGSIGHT_LOG_LEVEL": "INFO", "LAGSIGHT_MAX_REQUESTS": "0"})
    kills: list[dict] = []

    def killer():
        gap = ns.seconds / (ns.kills + 1)
        for _ in range(ns.kills):
            time.sleep(gap)
            before = lib.children(server.pid)
            if not before:
                return
            victim = before[0]
            kill = {"pid": victim, "at": time.monotonic(), "wall": time.time()}
            os.kill(victim, signal.SIGKILL)
            end = time.monotonic() + 30
            while time.monotonic() < end:  # bounded: wait for the replacement to be forked
                now = lib.children(server.pid)
                fresh = [p for p in now if p not in before]
                if len(now) == ns.workers and fresh:
                    kill["replacement"] = fresh[0]
                    kill["forked_after_s"] = round(time.monotonic() - kill["at"], 3)
                    break
                time.sleep(0.005)
            kills.append(kill)

    t = threading.Thread(target=killer)
    body = lib.payload(ns.points)
    try:
        t.start()
        load = lib.run_load(port, ns.seconds, ns.threads, body)
        t.join()
    finally:
        lib.stop(server)
    first_seen: dict[int, float] = {}
    for line in log.read_text().splitlines():
        if '"lagsight.access"' in line:
            entry = json.loads(line)
            first_seen.setdefault(entry["pid"], datetime.fromisoformat(entry["time"]).timestamp())
    per_kill = []
    for k in kills:
        served = first_seen.get(k.get("replacement"))
        per_kill.append({
            "killed_pid": k["pid"], "replacement_pid": k.get("replacement"),
            "replacement_forked_after_s": k.get("forked_after_s"),
            "replacement_first_answer_after_s": round(served - k["wall"], 3) if served else None,
        })
    errs = load.errors()
    result = {
        "command": (f"python -m ops.fault_kill_worker --seconds {ns.seconds:g} --threads {ns.threads} "
                    f"--workers {ns.workers} --kills {ns.kills} --points {ns.points}"),
        "workers": ns.workers, "threads": ns.threads, "seconds": ns.seconds, "points_per_request": ns.points,
        "load": load.summary(),
        "kills": per_kill,
        "errors_per_kill": round(len(errs) / max(len(kills), 1), 2),
        "recovery_time_s_max": max((k["replacement_first_answer_after_s"] or 0) for k in per_kill) if per_kill else None,
    }
    result["pass"] = (len(per_kill) == ns.kills and all(k["replacement_first_answer_after_s"] is not None for k in per_kill)
                      and len(errs) <= len(kills))  # at most the one request in flight on each killed worker
    print(json.dumps(result, indent=2))
    lib.write_result("fault_kill_worker", result)
    return 0 if result["pass"] else 1


if __name__ == "__main__":
    sys.exit(main())

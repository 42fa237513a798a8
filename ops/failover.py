"""nginx over two gunicorn instances, one killed mid-run: clients see no errors.

    .venv/bin/python -m ops.failover [--seconds 30] [--threads 16] [--workers 2]

Renders ops/nginx/lagsight.conf.template (the tested configuration), starts two
gunicorn instances and nginx on loopback, and runs a bounded load through nginx.
At one third of the run instance A is killed outright (SIGKILL to its master and
workers); at two thirds it is started again on the same port. Pass: zero
client-visible errors (5xx or connection failures), nginx logged upstream
failures (so retries really happened), and instance A served again after its
restart. Writes ops/results/failover.json.
"""
from __future__ import annotations

import argparse
import json
import os
import signal
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

from . import lib

TEMPLATE = Path(__file__).with_name("nginx") / "lagsight.conf.template"


def render(run_dir: Path, listen: int, upstream_ports: list[int]) -> Path:
    servers = "\n        ".join(f"server {lib.LOOPBACK}:{p} max_fails=1 fail_timeout=2s;" for p in upstream_ports)
    text = (TEMPLATE.read_text().replace("@RUN_DIR@", str(run_dir)).replace("@LISTEN@", f"{lib.LOOPBACK}:{listen}")
            .replace("@UPSTREAM_SERVERS@", servers))
    conf = run_dir / "nginx.conf"
    conf.write_text(text)
    return conf


def served_requests(log: Path) -> int:
    if not log.exists():
        return 0
    return sum(1 for line in log.read_text().splitlines()
               if '"lagsight.access"' in line and '"route":"/v1/diagnostics"' in line)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=30.0)
    ap.add_argument("--threads", type=int, default=16)
    ap.add_argument("--workers", type=int, default=2)
    ns = ap.parse_args(argv)
    nginx = lib.ensure_tool("nginx", "nginx")
    run_dir = Path(tempfile.mkdtemp(prefix="lagsight-nginx-"))
    port_a, port_b, listen = lib.free_port(), lib.free_port(), lib.free_port()
    log_a, log_a2, log_b = run_dir / "a.log", run_dir / "a-restarted.log", run_dir / "b.log"
    a = lib.start_gunicorn(port_a, ns.workers, log_a)
    b = lib.start_gunicorn(port_b, ns.workers, log_b)
    conf = render(run_dir, listen, [port_a, port_b])
    subprocess.run([nginx, "-t", "-e", str(run_dir / "error.log"), "-c", str(conf)], check=True,
                   capture_output=True)
    subprocess.run([nginx, "-e", str(run_dir / "error.log"), "-c", str(conf)], check=True)
    procs = {"a": a, "b": b}
    events: dict = {}

    def chaos():
        time.sleep(ns.seconds / 3)
        events["kill_at_s"] = round(ns.seconds / 3, 1)
        events["served_by_a_before_kill"] = served_requests(log_a)
        os.killpg(a.pid, signal.SIGKILL)  # the whole instance: master and workers
        a.wait()
        time.sleep(ns.seconds / 3)
        events["restart_at_s"] = round(2 * ns.seconds / 3, 1)
        procs["a"] = lib.start_gunicorn(port_a, ns.workers, log_a2)

    try:
        lib.wait_ready(listen)
        t = threading.Thread(target=chaos)
        t.start()
        load = lib.run_load(listen, ns.seconds, ns.threads, lib.payload())
        t.join()
    finally:
        pid_file = run_dir / "nginx.pid"
        if pid_file.exists():
            os.kill(int(pid_file.read_text().strip()), signal.SIGQUIT)  # graceful nginx stop
        for p in procs.values():
            lib.stop(p)
    error_log = (run_dir / "error.log").read_text() if (run_dir / "error.log").exists() else ""
    access_log = (run_dir / "access.log").read_text() if (run_dir / "access.log").exists() else ""
    retried = [line for line in access_log.splitlines() if "upstream_status=" in line and "," in line.split("upstream_status=")[1]]
    upstream_failures = sum(1 for line in error_log.splitlines() if "upstream" in line)
    statuses: dict[str, int] = {}
    for o in load.outcomes:
        key = str(o.status) if o.status else (o.error or "error")
        statuses[key] = statuses.get(key, 0) + 1
    result = {
        "command": f"python -m ops.failover --seconds {ns.seconds:g} --threads {ns.threads} --workers {ns.workers}",
        "nginx_config": str(TEMPLATE.relative_to(lib.ROOT)),
        "instances": 2, "workers_per_instance": ns.workers, "threads": ns.threads,
        "load": load.summary(), "statuses": statuses,
        **events,
        "served_by_a_after_restart": served_requests(log_a2),
        "served_by_b": served_requests(log_b),
        "nginx_upstream_failures_logged": upstream_failures,
        "requests_retried_on_the_other_instance": len(retried),
        "retried_sample": [line[:240] for line in retried[:2]],
        "nginx_error_log_sample": [line[:240] for line in error_log.splitlines() if "upstream" in line][:3],
    }
    result["pass"] = (result["load"]["errors"] == 0 and upstream_failures > 0
                      and result["served_by_a_after_restart"] > 0 and statuses.get("200", 0) == len(load.outcomes))
    print(json.dumps(result, indent=2))
    lib.write_result("failover", result)
    return 0 if result["pass"] else 1


if __name__ == "__main__":
    sys.exit(main())

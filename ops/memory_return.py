"""Worker memory after a big request: idle before, peak during, and after (or the worker recycled).

    .venv/bin/python -m ops.memory_return [--series 3000] [--points 250] [--rounds 2]

Starts gunicorn with the production config and one worker (so every request lands on the worker watched),
warms it with small requests of each kind (single, batch, chart), notes its resident memory (idle), then sends
a batch of --series invented series of --points values each with the full JSON answer, sampling the worker's
RSS every 20 ms (peak), and notes RSS 1 s and 5 s after the answer. The worker's own log lines about its
memory (lagsight.serving.heap.MemoryReturn: memory released, or the worker recycled) are kept in the result. Repeated --rounds times. A worker that
gunicorn replaced in the meantime is followed to its replacement (recycled).

Pass: after each big request the worker serving is within 20% of the idle size (or was recycled and its
replacement is). Writes ops/results/memory_return.json.
"""
from __future__ import annotations

import argparse
import http.client
import json
import sys
import tempfile
import threading
import time
from pathlib import Path

from . import lib

LIMIT = 1.20


def _batch(series: int, points: int) -> bytes:
    import numpy as np

    rng = np.random.default_rng(20261205)
    values = np.round(rng.standard_normal((series, points)), 3)
    items = [{"id": f"water meter {i} (invented)", "values": row.tolist()} for i, row in enumerate(values)]
    return json.dumps({"series": items}).encode()


def _post(port: int, path: str, body: bytes, content_type: str = "application/json") -> tuple[int, int]:
    conn = http.client.HTTPConnection(lib.LOOPBACK, port, timeout=300)
    try:
        conn.request("POST", path, body=body, headers={"Content-Type": content_type})
        resp = conn.getresponse()
        return resp.status, len(resp.read())
    finally:
        conn.close()


def _worker(master: int) -> int:
    end = time.monotonic() + 30
    while time.monotonic() < end:
        kids = lib.children(master)
        if kids:
            return kids[0]
        time.sleep(0.05)
    raise RuntimeError("no worker")


def _rss_mib(pid: int) -> float | None:
    try:
        return round(lib.rss_kib(pid) / 1024, 1)
    except OSError:
        return None


def _warm(port: int) -> None:
    small = lib.payload()
    for _ in range(3):
        _post(port, "/v1/diagnostics", small)
    _post(port, "/v1/diagnostics?format=png", small)
    _post(port, "/v1/diagnostics/batch", _batch(20, 120))


def one_round(port: int, master: int, big: bytes, idle: float) -> dict:
    pid = _worker(master)
    before = _rss_mib(pid)
    peak = [before]
    done = threading.Event()

    def sample():
        while not done.is_set():
            rss = _rss_mib(pid)
            if rss:
                peak[0] = max(peak[0], rss)
            time.sleep(0.02)

    sampler = threading.Thread(target=sample, daemon=True)
    sampler.start()
    t0 = time.monotonic()
    status, answer_bytes = _post(port, "/v1/diagnostics/batch", big)
    seconds = round(time.monotonic() - t0, 2)
    after = {}
    for wait in (1.0, 5.0):
        time.sleep(wait - (time.monotonic() - t0 - seconds))
        after[f"{wait:g}s"] = _rss_mib(pid)
    done.set()
    sampler.join()
    now = _worker(master)
    recycled = now != pid
    replacement = _rss_mib(now) if recycled else None
    final = replacement if recycled else after["5s"]
    return {"status": status, "answer_mib": round(answer_bytes / 2**20, 1), "request_s": seconds,
            "worker": pid, "before_mib": before, "peak_mib": peak[0], "after_mib": after,
            "recycled": recycled, "replacement_mib": replacement,
            "final_over_idle": round(final / idle, 3) if final and idle else None,
            "pass": status == 200 and final is not None and final <= LIMIT * idle}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--series", type=int, default=3000)
    ap.add_argument("--points", type=int, default=250)
    ap.add_argument("--rounds", type=int, default=2)
    ns = ap.parse_args(argv)
    log = Path(tempfile.mkdtemp(prefix="lagsight-mem-")) / "gunicorn.log"
    port = lib.free_port()
    server = lib.start_gunicorn(port, 1, log)
    try:
        _warm(port)
        time.sleep(1.0)
        idle = _rss_mib(_worker(server.pid))
        big = _batch(ns.series, ns.points)
        rounds = [one_round(port, server.pid, big, idle) for _ in range(ns.rounds)]
    finally:
        lib.stop(server)
    logged = [json.loads(line)["message"] for line in log.read_text(errors="replace").splitlines()
              if "worker memory after a large request" in line]
    result = {"command": f"python -m ops.memory_return --series {ns.series} --points {ns.points} "
                         f"--rounds {ns.rounds}",
              "settings": "defaults (LAGSIGHT_HEAP_KEEP_MB=64, LAGSIGHT_MAX_REQUESTS=1000), 1 worker",
              "body_mib": round(len(big) / 2**20, 1), "idle_mib": idle, "limit_over_idle": LIMIT,
              "rounds": rounds, "worker_log": logged,
              "pass": all(r["pass"] for r in rounds)}
    print(json.dumps(result, indent=2))
    lib.write_result("memory_return", result)
    return 0 if result["pass"] else 1


if __name__ == "__main__":
    sys.exit(main())

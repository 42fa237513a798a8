"""Start gunicorn on a free loopback port with the service's own gunicorn settings, and watch its workers."""
from __future__ import annotations

import http.client
import os
import signal
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Server:
    """gunicorn -c python:lagsight.serving.gunicorn_conf <app> (default benchmarks.noop_app:app) on 127.0.0.1,
    bounded start-up wait."""

    def __init__(self, workers: int = 2, timeout: int = 300, app: str = "benchmarks.noop_app:app"):
        self.app = app
        self.port = free_port()
        self.workers = workers
        self.timeout = timeout
        self.log = tempfile.NamedTemporaryFile(prefix="lagsight-bench-", suffix=".log", delete=False)
        self.proc: subprocess.Popen | None = None

    def __enter__(self) -> "Server":
        env = dict(os.environ, LAGSIGHT_HOST="127.0.0.1", LAGSIGHT_PORT=str(self.port),
                   LAGSIGHT_WORKERS=str(self.workers), LAGSIGHT_TIMEOUT=str(self.timeout), LAGSIGHT_LOG_LEVEL="WARNING",
                   PYTHONPATH=os.pathsep.join(filter(None, [str(ROOT), os.environ.get("PYTHONPATH")])))
        env.pop("PROMETHEUS_MULTIPROC_DIR", None)
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "gunicorn", "-c", "python:lagsight.serving.gunicorn_conf", self.app],
            stdout=subprocess.DEVNULL, stderr=self.log, env=env, cwd=ROOT)
        deadline = time.monotonic() + 60
        while True:
            try:
                conn = http.client.HTTPConnection("127.0.0.1", self.port, timeout=2)
                conn.request("GET", "/healthz")
                if conn.getresponse().status == 200 and len(self.worker_pids()) == self.workers:
                    break
            except OSError:
                pass
            if self.proc.poll() is not None or time.monotonic() > deadline:
                self.__exit__(None, None, None)
                raise RuntimeError("gunicorn did not start: " + Path(self.log.name).read_text()[-2000:])
            time.sleep(0.2)
        return self

    def __exit__(self, *exc) -> None:
        if self.proc and self.proc.poll() is None:
            self.proc.send_signal(signal.SIGTERM)
            try:
                self.proc.wait(timeout=30)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait(timeout=10)
        self.log.close()
        os.unlink(self.log.name)

    @property
    def base(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def worker_pids(self) -> list[int]:
        """Children of the gunicorn master, read from /proc."""
        pids = []
        for entry in os.listdir("/proc"):
            if not entry.isdigit():
                continue
            try:
                stat = Path(f"/proc/{entry}/stat").read_text()
            except OSError:
                continue
            ppid = int(stat.rsplit(")", 1)[1].split()[1])
            if self.proc and ppid == self.proc.pid:
                pids.append(int(entry))
        return sorted(pids)


def memory_kib(pid: int) -> dict:
    """VmRSS (now) and VmHWM (peak since start or the last reset) of a process, in KiB."""
    out = {}
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        key = line.split(":")[0]
        if key in ("VmRSS", "VmHWM"):
            out[key] = int(line.split()[1])
    return out


def reset_peak(pid: int) -> bool:
    """Reset VmHWM to the current RSS (Linux: write 5 to /proc/PID/clear_refs); False where not allowed."""
    try:
        Path(f"/proc/{pid}/clear_refs").write_text("5")
        return True
    except OSError:
        return False

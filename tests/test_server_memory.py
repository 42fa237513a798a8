"""Workers give memory back: after a big request a worker is within 20% of its idle size again, or recycled."""
from __future__ import annotations

import json
import re
import time
from pathlib import Path

import numpy as np
import pytest
import requests

from lagsight.serving import heap

from .live_server import live_gunicorn


def _rss_mib(pid: int) -> float | None:
    try:
        text = Path(f"/proc/{pid}/status").read_text()
    except OSError:  # the worker has exited
        return None
    return int(re.search(r"VmRSS:\s+(\d+)", text).group(1)) / 1024


def _log(tmp_path) -> list[dict]:
    return [json.loads(line) for path in tmp_path.glob("gunicorn-*.log")
            for line in path.read_text(errors="replace").splitlines() if line.startswith("{")]


def _worker_pid(tmp_path) -> int:
    return [e["pid"] for e in _log(tmp_path) if e.get("route") == "/v1/diagnostics/batch"][-1]


@pytest.mark.slow
@pytest.mark.skipif(not Path("/proc/self/statm").exists(), reason="resident memory is read from /proc")
def test_a_worker_is_back_near_its_idle_size_after_a_big_batch_or_recycled(tmp_path):
    """With the default settings (no LAGSIGHT_* memory variable set), one worker answers a batch of 2,000 series of
    250 values (the full JSON answer, about 70 MiB), which takes it far above its idle size. Within a few seconds it
    is within 20% of that size again (free heap pages handed back) or it has been replaced by a fresh worker, and
    the worker's log says which."""
    rng = np.random.default_rng(11)
    small = {"series": [{"id": "till 1 (invented)", "values": np.round(rng.standard_normal(120), 3).tolist()}]}
    big = {"series": [{"id": f"till {i} (invented)", "values": row.tolist()}
                      for i, row in enumerate(np.round(rng.standard_normal((2000, 250)), 3))]}
    with live_gunicorn(tmp_path) as base:
        for _ in range(2):
            assert requests.post(base + "/v1/diagnostics/batch", json=small, timeout=60).status_code == 200
        time.sleep(0.5)
        pid = _worker_pid(tmp_path)
        idle = _rss_mib(pid)
        assert requests.post(base + "/v1/diagnostics/batch", json=big, timeout=120).status_code == 200
        deadline = time.monotonic() + 15
        while time.monotonic() < deadline:
            lines = [e["message"] for e in _log(tmp_path) if "worker memory after a large request" in e["message"]]
            if lines:
                break
            time.sleep(0.2)
        assert lines, "the big batch did not take the worker over its bound, so nothing was shown"
        time.sleep(1.0)
        rss = _rss_mib(pid)
        if "recycled" in lines[-1]:
            assert requests.post(base + "/v1/diagnostics/batch", json=small, timeout=60).status_code == 200
            replacement = _worker_pid(tmp_path)
            assert replacement != pid and rss is None
            rss = _rss_mib(replacement)
        else:  # pages handed back, or already back by the time the worker looked
            assert "released" in lines[-1] or "settled" in lines[-1]
        assert rss <= 1.2 * idle, (idle, rss, lines)


@pytest.mark.skipif(not Path("/proc/self/statm").exists(), reason="resident memory is read from /proc")
def test_memory_held_by_live_objects_recycles_the_worker_and_freed_memory_does_not():
    """MemoryReturn against this process's real resident memory: 40% more held by a live array is over the bound
    and asks for a recycle; once the array is freed the process is within the bound and nothing is asked."""
    recycled, reports = [], []
    guard = heap.MemoryReturn(recycle=lambda: recycled.append(True), report=reports.append, delay_s=0.0)
    guard.start()
    held = np.ones(int(guard.idle * 0.4) // 8)  # written, so resident
    assert heap.resident_bytes() > guard.bound()
    assert guard.settle() == "recycled" and recycled == [True]
    assert reports[-1]["outcome"] == "recycled" and reports[-1]["after_mib"] > reports[-1]["bound_mib"]
    del held
    assert guard.settle() in ("settled", "released") and recycled == [True]
    assert heap.resident_bytes() <= guard.bound()

"""Measurements through gunicorn on loopback: the batch (2), single-request throughput against a no-op (3),
and one long series with the worker's peak memory (4)."""
from __future__ import annotations

import http.client
import statistics
import time

import numpy as np
import orjson

from . import load, timing, workloads
from .server import Server, memory_kib, reset_peak


def post(server: Server, path: str, body: bytes, accept: str = "application/json", timeout: float = 600):
    conn = http.client.HTTPConnection("127.0.0.1", server.port, timeout=timeout)
    conn.request("POST", path, body=body, headers={"Content-Type": "application/json", "Accept": accept})
    resp = conn.getresponse()
    data = resp.read()
    conn.close()
    if resp.status != 200:
        raise RuntimeError(f"{path} answered {resp.status}: {data[:300]!r}")
    return data


def measure_batch(server: Server, x: np.ndarray, max_lag: int, period: int, repeats: int) -> dict:
    """Measurement 2: the client encodes the JSON body, posts it, reads and decodes the whole answer.

    Cases, side by side in each round: the JSON answer with ``detail`` "full" (every series' whole
    report) and "brief" (verdict and test numbers per series), and the brief answer streamed as
    NDJSON: the time to the first result line, and to the last line with every line decoded.
    """
    full_body = workloads.batch_body(x, period, max_lag)
    brief_body = {**full_body, "detail": "brief"}
    m = x.shape[0]

    def round_trip(body_obj):
        answer = orjson.loads(post(server, "/v1/diagnostics/batch", orjson.dumps(body_obj)))
        assert len(answer["results"]) == m
        return answer

    def ndjson(body_obj):
        conn = http.client.HTTPConnection("127.0.0.1", server.port, timeout=600)
        start = time.perf_counter()
        conn.request("POST", "/v1/diagnostics/batch", body=orjson.dumps(body_obj),
                     headers={"Content-Type": "application/json", "Accept": "application/x-ndjson"})
        resp = conn.getresponse()
        first = orjson.loads(resp.readline())
        t_first = time.perf_counter() - start
        lines = [orjson.loads(line) for line in resp.read().splitlines()]
        t_all = time.perf_counter() - start
        conn.close()
        assert first["kind"] == "result" and lines[-1]["kind"] == "summary" and len(lines) == m
        return t_first, t_all

    full, brief = round_trip(full_body), round_trip(brief_body)
    assert brief["summary"] == full["summary"]
    sizes = {"request_bytes": len(orjson.dumps(full_body)), "response_bytes": len(orjson.dumps(full)),
             "response_bytes_brief": len(orjson.dumps(brief))}
    del full, brief
    runs: dict[str, list[float]] = {"json_full": [], "json_brief": [], "ndjson_brief_first_line": [],
                                    "ndjson_brief_all": []}
    for _ in range(repeats):
        runs["json_full"].append(timing.seconds(lambda: round_trip(full_body)))
        runs["json_brief"].append(timing.seconds(lambda: round_trip(brief_body)))
        t_first, t_all = ndjson(brief_body)
        runs["ndjson_brief_first_line"].append(t_first)
        runs["ndjson_brief_all"].append(t_all)
    summary = round_trip(brief_body)["summary"]
    return {"m": m, "n": x.shape[1], **sizes, "times": {k: timing.summary(v) for k, v in runs.items()},
            "summary": summary}


def measure_single_throughput(server: Server, n: int, seconds: int, repeats: int, connections: int,
                              tool: str) -> dict:
    """Measurement 3: 120-point bodies to the diagnosis and to the no-op, alternating rounds.

    Two diagnosis bodies: white-noise residuals (the common case, as "diagnosis") and a series with a
    period-12 cycle ("diagnosis_seasonal"), whose seasonal lag outside the band adds the STL seasonal strength.
    """
    x = workloads.batch(3, n)
    body = orjson.dumps({"values": x[0].tolist(), "period": 12})
    seasonal = orjson.dumps({"values": x[2].tolist(), "period": 12})
    bodies = {"noop": body, "diagnosis": body, "diagnosis_seasonal": seasonal}
    post(server, "/v1/diagnostics", body)  # warm both workers' code paths
    post(server, "/v1/diagnostics", seasonal)
    rounds = {"diagnosis": [], "diagnosis_seasonal": [], "noop": []}
    for _ in range(repeats):
        for name, path in (("noop", "/bench/noop"), ("diagnosis", "/v1/diagnostics"),
                           ("diagnosis_seasonal", "/v1/diagnostics")):
            body = bodies[name]
            if tool == "wrk":
                r = load.wrk(server.base + path, body, seconds, connections, threads=2)
            else:
                r = load.python_load("127.0.0.1", server.port, path, body, seconds, connections)
            if r["non_2xx"]:
                raise RuntimeError(f"{path}: {r['non_2xx']} responses were not 2xx")
            rounds[name].append(r)
    med = {name: {key: statistics.median(r[key] for r in rs) for key in ("rps", "p50", "p99")}
           for name, rs in rounds.items()}
    return {"n": n, "seconds": seconds, "repeats": repeats, "connections": connections, "tool": tool,
            "rounds": rounds, "median": med, "request_bytes": len(body)}


def numpy_fft_acf(values: np.ndarray, max_lag: int) -> np.ndarray:
    d = values - values.mean()
    size = 1 << int(np.ceil(np.log2(d.size + max_lag)))
    spec = np.fft.rfft(d, n=size)
    c = np.fft.irfft(spec.real**2 + spec.imag**2, n=size)[: max_lag + 1]
    return c[1:] / c[0]


def measure_long(server: Server, n: int, max_lag: int, repeats: int) -> dict:
    """Measurement 4: one long series end to end, against orjson parse + NumPy FFT ACF; worker peak memory."""
    values = workloads.long_series(n)
    body_obj = {"values": values.tolist(), "max_lag": max_lag}
    body = orjson.dumps(body_obj)

    def end_to_end():
        return orjson.loads(post(server, "/v1/diagnostics", orjson.dumps(body_obj)))

    def floor():
        return numpy_fft_acf(np.asarray(orjson.loads(body)["values"], dtype=np.float64), max_lag)

    answer = end_to_end()
    assert np.allclose(answer["acf"]["values"], floor(), atol=1e-9)
    times = timing.interleaved({"end_to_end": end_to_end, "floor": floor}, repeats, warmup=False)
    return {"n": n, "max_lag": max_lag, "request_bytes": len(body), "raw_float64_bytes": n * 8, "times": times}


def measure_long_memory(n: int, max_lag: int, repeats: int) -> dict:
    """Peak memory a one-worker server adds while answering one long series (a fresh server each time, so
    memory freed by an earlier request cannot hide the peak): VmHWM after the request minus VmRSS before it."""
    body = orjson.dumps({"values": workloads.long_series(n).tolist(), "max_lag": max_lag})
    warm = orjson.dumps({"values": workloads.long_series(200).tolist()})
    increases, idle = [], []
    for _ in range(repeats):
        with Server(workers=1) as server:
            post(server, "/v1/diagnostics", warm)
            (pid,) = server.worker_pids()
            before = memory_kib(pid)["VmRSS"]
            if not reset_peak(pid):
                return {"n": n, "peak_increase_kib": None, "note": "cannot reset VmHWM on this system"}
            post(server, "/v1/diagnostics", body)
            increases.append(memory_kib(pid)["VmHWM"] - before)
            idle.append(before)
    return {"n": n, "max_lag": max_lag, "raw_float64_bytes": n * 8, "request_bytes": len(body),
            "peak_increase_kib": statistics.median(increases), "runs_kib": increases,
            "worker_rss_before_kib": statistics.median(idle)}

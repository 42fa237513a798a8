"""The answer's size, the full answer's cost in process and a worker's peak memory, this code against a base commit.

Run from the repository root::

    python -m benchmarks.shape_bench                 # base = git merge-base HEAD main; rewrites its section
    python -m benchmarks.shape_bench --quick --no-write

Both codes run side by side in each round, each case in a fresh child process (``PYTHONPATH`` pointing at
that code's ``service/``; the base is ``git archive``'d into a temporary directory), one BLAS thread:

- ``bytes``: a single JSON answer for 120 random-normal points at max_lag 24, and a full-detail batch of
  ``--size-series`` such series (bytes per series), through the app's test client;
- ``in_process``: a batch of ``--series`` x 120 points at max_lag 24 and period 12: the engine alone
  (its blocks, as the service cuts them) against the full answer (plan, engine, report, reading and the
  JSON bytes of the batch answer); their ratio is taken within each child, side by side;
- ``http``: a full-detail batch of ``--series`` x 120 points over HTTP (gunicorn, 2 workers) against the
  same-estimator statsmodels loop on the same series, and single 120-point requests against the no-op route
  (requests per second and p99, as measurement 3 of ``benchmarks.run``, 5 s each);
- ``memory``: the peak resident set (VmHWM) of a one-worker gunicorn server with the service's settings
  while it answers a full-detail batch of ``--memory-series`` x 250 points posted over 127.0.0.1, and the
  worker's resident set before the request (a fresh server each time).

The section of BENCHMARKS.md between the ``shape-bench`` markers is rewritten (``benchmarks.report`` keeps
it), and ``BENCHMARKS.json`` gains a ``shape`` key.
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tarfile
import tempfile
from io import BytesIO
from pathlib import Path

from benchmarks.sections import replace_section

ROOT = Path(__file__).resolve().parents[1]
START = "<!-- shape-bench: written by python -m benchmarks.shape_bench, kept by make bench -->"
END = "<!-- /shape-bench -->"
_BIG = 10**9


def _app():
    from lagsight import create_app

    return create_app({"TESTING": True, "MAX_SERIES": _BIG, "MAX_BATCH_POINTS": _BIG, "MAX_COST": _BIG,
                       "MAX_BODY_BYTES": _BIG, "LOG_LEVEL": "WARNING"})


def case_bytes(series: int) -> dict:
    import numpy as np

    client = _app().test_client()
    rng = np.random.default_rng(1)
    single = client.post("/v1/diagnostics", json={"values": rng.standard_normal(120).tolist(), "max_lag": 24})
    items = [{"id": f"s-{i}", "values": rng.standard_normal(120).tolist()} for i in range(series)]
    batch = client.post("/v1/diagnostics/batch", json={"series": items, "max_lag": 24})
    assert single.status_code == batch.status_code == 200
    return {"single": len(single.data), "batch_per_series": len(batch.data) / series}


def case_in_process(series: int) -> dict:
    import time

    from threadpoolctl import threadpool_limits

    from benchmarks import engine_bench, workloads
    from lagsight.outputs.encode import dumps

    try:
        from lagsight.outputs.shared import hoist
    except ImportError:  # the base code says nothing once
        def hoist(results):
            return None

    x = workloads.batch(series, 120)
    with threadpool_limits(1):
        engine_bench.engine_only(x[:50], 24, 12)  # null tables and caches built once, outside the timings
        engine_bench.full_reports(x[:50], 24, 12)
        t0 = time.perf_counter()
        engine_bench.engine_only(x, 24, 12)
        engine = time.perf_counter() - t0
        t0 = time.perf_counter()
        results = [{"id": i, **r} for i, r in enumerate(engine_bench.full_reports(x, 24, 12))]
        shared = hoist(results)
        body = dumps({"results": results} if shared is None else {"shared": shared, "results": results})
        full = time.perf_counter() - t0
    return {"engine_s": engine, "full_s": full, "ratio": full / engine, "answer_bytes": len(body)}


def case_memory(series: int) -> dict:
    """A one-worker gunicorn server (the service's own settings) answers one full-detail batch: the worker's peak
    resident set (VmHWM) and its resident set before the request, in a fresh server."""
    import numpy as np
    import orjson

    from benchmarks.http_bench import post
    from benchmarks.server import Server, memory_kib, reset_peak

    rng = np.random.default_rng(2)
    body = orjson.dumps({"series": [{"id": i, "values": row} for i, row in
                                    enumerate(rng.standard_normal((series, 250)).tolist())]})
    limits = {"LAGSIGHT_MAX_SERIES": str(_BIG), "LAGSIGHT_MAX_BATCH_POINTS": str(_BIG), "LAGSIGHT_MAX_COST": str(_BIG),
              "LAGSIGHT_MAX_BODY_BYTES": str(_BIG)}
    os.environ.update(limits)
    with Server(workers=1, timeout=900) as server:
        post(server, "/v1/diagnostics/batch", orjson.dumps({"series": [{"id": 1, "values": list(range(250))}]}))
        (pid,) = server.worker_pids()
        before = memory_kib(pid)["VmRSS"] / 1024
        reset_peak(pid)
        answer = post(server, "/v1/diagnostics/batch", body, timeout=900)
        peak = memory_kib(pid)["VmHWM"] / 1024
    return {"rss_before_mib": before, "peak_mib": peak, "answer_mib": len(answer) / 2**20,
            "request_mib": len(body) / 2**20}


def case_http(series: int) -> dict:
    """A full-detail batch of ``series`` x 120 points (max_lag 24, period 12) over HTTP (gunicorn, the service's
    settings, 2 workers; the client encodes, posts, reads and decodes) against the same-estimator statsmodels
    loop on the same series in this process, one after the other; then single 120-point requests against the
    no-op route of the same server (benchmarks.http_bench measurement 3, 5 s each)."""
    import time

    import orjson
    from threadpoolctl import threadpool_limits

    from benchmarks import engine_bench, http_bench, load, workloads
    from benchmarks.server import Server

    x = workloads.batch(series, 120)
    body = orjson.dumps({"series": [{"id": i, "values": row} for i, row in enumerate(x.tolist())], "max_lag": 24,
                         "period": 12})
    with Server(workers=2) as server:
        http_bench.post(server, "/v1/diagnostics/batch", orjson.dumps({"series": [{"id": 1, "values": x[0].tolist()}]}))
        t0 = time.perf_counter()
        orjson.loads(http_bench.post(server, "/v1/diagnostics/batch", body))
        http = time.perf_counter() - t0
        with threadpool_limits(1):
            t0 = time.perf_counter()
            engine_bench.statsmodels_loop(x, 24, [10, 24])
            loop = time.perf_counter() - t0
        single = http_bench.measure_single_throughput(server, 120, 5, 1, 16, load.available_tool("wrk"))["median"]
    return {"http_s": http, "loop_s": loop, "loop_over_http": loop / http,
            "rps_share": single["diagnosis"]["rps"] / single["noop"]["rps"],
            "p99_ratio": single["diagnosis"]["p99"] / single["noop"]["p99"]}


CASES = {"bytes": case_bytes, "in_process": case_in_process, "memory": case_memory, "http": case_http}


def base_tree(commit: str, into: Path) -> Path:
    """The base commit's service/, benchmarks/ and openapi/ unpacked under ``into``."""
    data = subprocess.run(["git", "archive", commit, "service", "benchmarks", "openapi"], cwd=ROOT, check=True,
                          capture_output=True).stdout
    with tarfile.open(fileobj=BytesIO(data)) as tar:
        tar.extractall(into, filter="data")
    return into


def run_case(tree: Path, case: str, size: int) -> dict:
    env = {**os.environ, "PYTHONPATH": f"{tree / 'service'}{os.pathsep}{tree}", "OPENBLAS_NUM_THREADS": "1",
           "LAGSIGHT_LOG_LEVEL": "WARNING"}
    code = f"import json, benchmarks.shape_bench as b; print(json.dumps(b.CASES[{case!r}]({size})))"
    out = subprocess.run([sys.executable, "-c", code], cwd=tree, env=env, check=True, capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def measure(commit: str, sizes: dict, rounds: int, log=print) -> dict:
    results: dict = {"base": commit, "sizes": sizes, "rounds": rounds, "cases": {}}
    with tempfile.TemporaryDirectory() as tmp:
        base = base_tree(commit, Path(tmp))
        # The base tree runs this module's cases from the current benchmarks/ (copied in).
        (base / "benchmarks" / "shape_bench.py").write_text(Path(__file__).read_text())
        for case, size in sizes.items():
            rows = results["cases"][case] = {"base": [], "now": []}
            for r in range(rounds if case != "bytes" else 1):
                for label, tree in (("base", base), ("now", ROOT)):
                    log(f"{case} ({size}) round {r + 1}: {label}")
                    rows[label].append(run_case(tree, case, size))
    return results


def _median(rows: list[dict], key: str) -> float:
    return statistics.median(row[key] for row in rows)


def section(results: dict) -> str:
    c = results["cases"]
    b, m, p = c["bytes"], c["in_process"], c["memory"]
    s = results["sizes"]
    peak_ratio = _median(p["base"], "peak_mib") / _median(p["now"], "peak_mib")
    lines = [
        START,
        "## Batches at scale: answer shape, full answer, memory and single requests (against the base commit)",
        "",
        f"`python -m benchmarks.shape_bench` against {results['base'][:12]} (the code before this work), each case "
        f"in a fresh process, both codes side by side in each of {results['rounds']} rounds; medians.",
        "",
        "| figure | target | base | now | status |",
        "| --- | --- | --- | --- | --- |",
        f"| single JSON answer, 120 points, max_lag 24 | <= 12 KB | {b['base'][0]['single'] / 1024:.1f} KB | "
        f"{b['now'][0]['single'] / 1024:.1f} KB | {'met' if b['now'][0]['single'] <= 12288 else '**not met** at the default digits'} |",
        f"| full batch of {s['bytes']:,} such series, per series | <= 8 KB | {b['base'][0]['batch_per_series'] / 1024:.1f} KB | "
        f"{b['now'][0]['batch_per_series'] / 1024:.1f} KB | {'met' if b['now'][0]['batch_per_series'] <= 8192 else '**not met**'} |",
        f"| full answer in process ({s['in_process']:,} x 120), engine + report + reading + JSON, vs engine alone | "
        f"<= 5x | {_median(m['base'], 'ratio'):.1f}x | {_median(m['now'], 'ratio'):.1f}x | "
        f"{'met' if _median(m['now'], 'ratio') <= 5 else '**not met**'} |",
        f"| worker peak memory, full batch of {s['memory']:,} x 250 (gunicorn worker VmHWM) | >= 3x lower | "
        f"{_median(p['base'], 'peak_mib'):,.0f} MiB | {_median(p['now'], 'peak_mib'):,.0f} MiB | "
        f"{peak_ratio:.1f}x lower: {'met' if peak_ratio >= 3 else '**not met**'} |",
    ]
    if "http" in c:
        h = c["http"]
        loop, rps, p99 = (_median(h["now"], k) for k in ("loop_over_http", "rps_share", "p99_ratio"))
        lines += [
            f"| full batch over HTTP ({s['http']:,} x 120), speed vs the same-estimator statsmodels loop | >= 10x | "
            f"{_median(h['base'], 'loop_over_http'):.1f}x | {loop:.1f}x | {'met' if loop >= 10 else '**not met**'} |",
            f"| single 120-point requests: requests/s vs the no-op | >= 40% | {_median(h['base'], 'rps_share'):.0%} | "
            f"{rps:.0%} | {'met' if rps >= 0.4 else '**not met**'} |",
            f"| single requests: p99 vs the no-op's | <= 3x | {_median(h['base'], 'p99_ratio'):.1f}x | {p99:.1f}x | "
            f"{'met' if p99 <= 3 else '**not met**'} |",
        ]
    lines += [
        "",
        f"In process: engine {_median(m['base'], 'engine_s'):.2f} s / {_median(m['now'], 'engine_s'):.2f} s (base / "
        f"now), full answer {_median(m['base'], 'full_s'):.2f} s / {_median(m['now'], 'full_s'):.2f} s, answer "
        f"{_median(m['base'], 'answer_bytes') / 2**20:,.0f} MiB / {_median(m['now'], 'answer_bytes') / 2**20:,.0f} MiB. "
        f"Memory: the worker's resident set before the request {_median(p['base'], 'rss_before_mib'):,.0f} MiB / "
        f"{_median(p['now'], 'rss_before_mib'):,.0f} MiB; request {_median(p['now'], 'request_mib'):,.0f} MiB; answer "
        f"{_median(p['base'], 'answer_mib'):,.0f} MiB / {_median(p['now'], 'answer_mib'):,.0f} MiB.",
        END,
    ]
    return "\n".join(lines)


def write(text: str, path: Path) -> None:
    """Replace the section between the markers, or put it before the analysis."""
    replace_section(path, text, START, END)


def main(argv=None) -> dict:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--base", default=None, help="the commit to compare with (default: git merge-base HEAD main)")
    parser.add_argument("--series", type=int, default=10_000, help="series of the in-process batch")
    parser.add_argument("--memory-series", type=int, default=20_000)
    parser.add_argument("--size-series", type=int, default=200)
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--quick", action="store_true", help="tiny sizes, one round")
    parser.add_argument("--no-write", action="store_true")
    parser.add_argument("--only", nargs="+", choices=tuple(CASES), default=None,
                        help="run only these cases (the section is printed, not written)")
    parser.add_argument("--out", type=Path, default=ROOT / "BENCHMARKS.md")
    ns = parser.parse_args(argv)
    base = ns.base or subprocess.run(["git", "merge-base", "HEAD", "main"], cwd=ROOT, check=True,
                                     capture_output=True, text=True).stdout.strip()
    sizes = ({"bytes": 20, "in_process": 100, "memory": 200} if ns.quick else
             {"bytes": ns.size_series, "in_process": ns.series, "memory": ns.memory_series, "http": ns.series})
    if ns.only:
        sizes = {k: v for k, v in sizes.items() if k in ns.only}
    results = measure(base, sizes, 1 if ns.quick else ns.rounds)
    if ns.only:
        print(json.dumps(results, indent=1, default=float))
        return results
    text = section(results)
    print(text)
    if not ns.no_write:
        write(text, ns.out)
        raw = ns.out.with_suffix(".json")
        data = json.loads(raw.read_text()) if raw.exists() else {}
        data["shape"] = results
        raw.write_text(json.dumps(data, indent=1, default=float) + "\n")
    return results


if __name__ == "__main__":
    main()

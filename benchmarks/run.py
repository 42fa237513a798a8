"""Run the six measurements and write BENCHMARKS.md: ``python -m benchmarks.run`` (``make bench``).

Options: ``--quick`` (tiny sizes, a minute or less; used by the test suite), ``--repeats N``,
``--out PATH`` (default BENCHMARKS.md at the repository root), ``--load {wrk,python}``,
``--only 1 3`` (run only those measurements and print their raw numbers; no report is written).
The hand-written analysis between the ``notes`` markers of an existing report is kept.
"""
from __future__ import annotations

import argparse
import json
import time
from pathlib import Path

from threadpoolctl import threadpool_limits

from lagsight import config
from lagsight.serving import heap

from . import engine_bench, http_bench, load, machine, workloads
from .report import render
from .server import Server

ROOT = Path(__file__).resolve().parents[1]

FULL = {
    "batch": {"m": 10_000, "n": 120, "max_lag": 24, "period": 12, "default_loop_rows": 1_000},
    "scaling": {"lengths": [1_000, 10_000, 100_000, 1_000_000], "batch_sizes": [100, 1_000, 10_000],
                "max_lag": 100, "batch_n": 120, "batch_lag": 24},
    "throughput": {"n": 120, "seconds": 10, "connections": 16},
    "long": {"n": 1_000_000, "max_lag": 100},
    "mixed": {"m": 2_000, "shortest": 100, "longest": 1_000},
    "daily": {"m": 2_515, "shortest": 730, "longest": 1_100, "period": 365, "sample": 40},
}
QUICK = {
    "batch": {"m": 60, "n": 120, "max_lag": 24, "period": 12, "default_loop_rows": 10},
    "scaling": {"lengths": [1_000, 4_000], "batch_sizes": [10, 40], "max_lag": 100, "batch_n": 120, "batch_lag": 24},
    "throughput": {"n": 120, "seconds": 1, "connections": 2},
    "long": {"n": 5_000, "max_lag": 100},
    "mixed": {"m": 20, "shortest": 100, "longest": 300},
    "daily": {"m": 12, "shortest": 60, "longest": 90, "period": 12, "sample": 3},
}


def measure(sizes: dict, repeats: int, tool: str, log=print, only: set[str] | None = None) -> dict:
    """The measurements, or those numbered in ``only`` ("1" to "6")."""
    wanted = only or {"1", "2", "3", "4", "5", "6"}
    started = time.time()
    results: dict = {"machine": machine.describe(), "repeats": repeats, "load_tool": tool}
    b = sizes["batch"]
    # In-process measurements run as every service worker does (gunicorn_conf): one BLAS thread, and
    # freed array memory kept for reuse (lagsight.serving.heap; it applies to every case alike).
    keep = config.load()["HEAP_KEEP_MB"]
    results["heap_keep_mb"] = keep if heap.keep_freed_memory(keep) else 0
    with threadpool_limits(1):
        if "1" in wanted:
            log(f"1. batch of {b['m']} x {b['n']}: engine, full report, NumPy floor, statsmodels loops")
            results["batch"] = engine_bench.measure_batch(b["m"], b["n"], b["max_lag"], b["period"], repeats,
                                                          b["default_loop_rows"])
        if "5" in wanted:
            s = sizes["scaling"]
            log("5. scaling with length and batch size")
            results["scaling"] = engine_bench.measure_scaling(s["lengths"], s["batch_sizes"], s["max_lag"],
                                                              s["batch_n"], s["batch_lag"], repeats)
            mx = sizes["mixed"]
            results["scaling"]["mixed"] = engine_bench.measure_mixed(mx["m"], mx["shortest"], mx["longest"], repeats)
        if "6" in wanted:
            d = sizes["daily"]
            log(f"6. {d['m']:,} daily series of {d['shortest']:,} to {d['longest']:,} points, period {d['period']}")
            results["daily"] = engine_bench.measure_daily(d["m"], d["shortest"], d["longest"], d["period"],
                                                          repeats, d["sample"])
    if wanted & {"2", "3", "4"}:
        with Server(workers=2) as server:
            if "2" in wanted:
                log("2. the batch through HTTP")
                x = workloads.batch(b["m"], b["n"])
                results["http_batch"] = http_bench.measure_batch(server, x, b["max_lag"], b["period"], repeats)
            if "3" in wanted:
                t = sizes["throughput"]
                log(f"3. single {t['n']}-point requests against the no-op ({tool})")
                results["throughput"] = http_bench.measure_single_throughput(server, t["n"], t["seconds"], repeats,
                                                                             t["connections"], tool)
            if "4" in wanted:
                lg = sizes["long"]
                log(f"4. one series of {lg['n']} points")
                results["long"] = http_bench.measure_long(server, lg["n"], lg["max_lag"], repeats)
    if "4" in wanted:
        lg = sizes["long"]
        results["long_memory"] = http_bench.measure_long_memory(lg["n"], lg["max_lag"], repeats)
    results["machine"]["load_average_at_end"] = machine.load_average()
    results["wall_seconds"] = time.time() - started
    return results


def main(argv=None) -> dict:
    parser = argparse.ArgumentParser(prog="python -m benchmarks.run", description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="tiny sizes, to check the code runs")
    parser.add_argument("--repeats", type=int, default=None, help="rounds per measurement (default 7, quick 1)")
    parser.add_argument("--out", type=Path, default=ROOT / "BENCHMARKS.md")
    parser.add_argument("--load", choices=("wrk", "python"), default="wrk",
                        help="load generator for measurement 3 (wrk falls back to python when not installed)")
    parser.add_argument("--only", nargs="+", choices=("1", "2", "3", "4", "5", "6"), default=None,
                        help="run only these measurements and print their raw numbers (the report is not written)")
    ns = parser.parse_args(argv)
    repeats = ns.repeats or (1 if ns.quick else 7)
    tool = load.available_tool(ns.load)
    results = measure(QUICK if ns.quick else FULL, repeats, tool, only=set(ns.only) if ns.only else None)
    results["quick"] = ns.quick
    if ns.only:
        print(json.dumps(results, indent=1, default=float))
        return results
    previous = ns.out.read_text() if ns.out.exists() else ""
    ns.out.write_text(render(results, previous))
    ns.out.with_suffix(".json").write_text(json.dumps(results, indent=1, default=float) + "\n")
    print(f"wrote {ns.out} and {ns.out.with_suffix('.json')}")
    return results


if __name__ == "__main__":
    main()

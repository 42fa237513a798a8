"""What-if for measurement 3: ``python -m benchmarks.ceiling`` (about two minutes; prints, writes nothing).

Serves the single 120-point diagnosis twice, side by side with the no-op route of the same
server: with the real engine, and with the engine's result cached (``engine_free_app``), so
that the engine costs nothing. The second ratio is the most that a faster engine could give
the requests/s target. BENCHMARKS.md quotes a run of it.
"""
from __future__ import annotations

import argparse

from . import load
from .http_bench import measure_single_throughput
from .report import paired
from .server import Server


def measure(seconds: int = 6, rounds: int = 3, connections: int = 16) -> dict:
    """Measurement 3's rounds (benchmarks.http_bench) on the real server and on the engine-free one."""
    tool = load.available_tool("wrk")
    out = {}
    for label, app in (("engine", "benchmarks.noop_app:app"), ("engine_free", "benchmarks.engine_free_app:app")):
        with Server(workers=2, app=app) as server:
            result = measure_single_throughput(server, 120, seconds, rounds, connections, tool)
        rps = {name: [r["rps"] for r in rs] for name, rs in result["rounds"].items()}
        out[label] = {"noop_rps": result["median"]["noop"]["rps"],
                      "diagnosis_rps": result["median"]["diagnosis"]["rps"],
                      "share": paired(rps["diagnosis"], rps["noop"])}
    return {"tool": tool, "seconds": seconds, "rounds": rounds, "connections": connections, **out}


def main(argv=None) -> dict:
    parser = argparse.ArgumentParser(prog="python -m benchmarks.ceiling", description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=int, default=6)
    parser.add_argument("--rounds", type=int, default=3)
    ns = parser.parse_args(argv)
    result = measure(ns.seconds, ns.rounds)
    for label in ("engine", "engine_free"):
        r = result[label]
        print(f"{label:12s} no-op {r['noop_rps']:,.0f} req/s, diagnosis {r['diagnosis_rps']:,.0f} req/s: "
              f"{r['share']:.0%} of the no-op")
    return result


if __name__ == "__main__":
    main()

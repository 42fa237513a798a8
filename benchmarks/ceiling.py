"""What-if for measurement 3: ``python -m benchmarks.ceiling`` (a minute; prints, writes nothing).

Serves the single 120-point diagnosis twice, side by side with the no-op route of the same
server: with the real engine, and with the engine's result cached (``engine_free_app``), so
that the engine costs nothing. The second ratio is the most that a faster engine could give
the requests/s target. BENCHMARKS.md quotes a run of it.
"""
from __future__ import annotations

import argparse
import statistics

import orjson

from . import load, workloads
from .http_bench import post
from .server import Server


def measure(seconds: int = 6, rounds: int = 3, connections: int = 16) -> dict:
    x = workloads.batch(3, 120)
    body = orjson.dumps({"values": x[0].tolist(), "period": 12})
    tool = load.available_tool("wrk")
    out = {}
    for label, app in (("engine", "benchmarks.noop_app:app"), ("engine_free", "benchmarks.engine_free_app:app")):
        rps: dict[str, list[float]] = {"noop": [], "diagnosis": []}
        with Server(workers=2, app=app) as server:
            post(server, "/v1/diagnostics", body)
            for _ in range(rounds):
                for name, path in (("noop", "/bench/noop"), ("diagnosis", "/v1/diagnostics")):
                    if tool == "wrk":
                        r = load.wrk(server.base + path, body, seconds, connections, threads=2)
                    else:
                        r = load.python_load("127.0.0.1", server.port, path, body, seconds, connections)
                    rps[name].append(r["rps"])
        share = statistics.median(d / n for d, n in zip(rps["diagnosis"], rps["noop"]))
        out[label] = {"noop_rps": statistics.median(rps["noop"]), "diagnosis_rps": statistics.median(rps["diagnosis"]),
                      "share": share}
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

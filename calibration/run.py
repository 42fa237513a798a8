"""Run the calibration simulation and write CALIBRATION.md: ``python -m calibration.run`` (``make calibrate``).

Options: ``--reps N`` (series per case for every scenario; default 2,000 for the i.i.d. families,
1,000 for AR(1) 0.3 and MA(1) 0.4, 400 for the other processes), ``--batches N`` (pure-noise batches,
default 800; a quarter as many AR batches), ``--quick`` (tiny sizes, to check the code runs; used by the
test suite), ``--only NAME ...`` (only these scenarios; ``batch`` for the false-discovery part),
``--out PATH`` (default CALIBRATION.md at the repository root; CALIBRATION.json beside it).
The hand-written analysis between the ``notes`` markers of an existing report is kept.
"""
from __future__ import annotations

import argparse
import datetime as dt
import json
import subprocess
import sys
import time
from pathlib import Path

from threadpoolctl import threadpool_limits

from benchmarks import machine

from . import consult, targets
from . import measure as ms
from .report import pct, render
from .scenarios import BASE_SEED, IID_NS, MECHANISM_NS, POWER_SCENARIOS, SCENARIOS

ROOT = Path(__file__).resolve().parents[1]

FULL = {"iid_reps": 2000, "power_reps": 1000, "mechanism_reps": 400, "iid_ns": IID_NS, "mechanism_ns": MECHANISM_NS,
        "noise_batches": 800, "ar_batches": 200, "extra_confidence": 0.90}
QUICK = {"iid_reps": 40, "power_reps": 40, "mechanism_reps": 30, "iid_ns": (20, 100), "mechanism_ns": (100, 300),
         "noise_batches": 2, "ar_batches": 2, "extra_confidence": 0.90}


def git_commit() -> str:
    """HEAD's hash, with "+ uncommitted changes" when the working tree differs from it."""
    def git(*args):
        return subprocess.run(["git", *args], cwd=ROOT, capture_output=True, text=True, check=False).stdout.strip()
    head = git("rev-parse", "HEAD") or "unknown"
    return head + (" + uncommitted changes" if git("status", "--porcelain") else "")


def plan_cases(plan: dict, only: set[str] | None = None) -> list[tuple]:
    """(scenario, n, reps, variants) in the order they run; variants are (timestamps, confidence)."""
    out = []
    for s in SCENARIOS.values():
        if only and s.name not in only:
            continue
        if s.name == "short":
            ns = s.ns
        else:
            ns = [n for n in s.ns if n in (plan["iid_ns"] if s.family == "iid" else plan["mechanism_ns"])]
        reps = plan["iid_reps"] if s.family == "iid" else (
            plan["power_reps"] if s.name in POWER_SCENARIOS else plan["mechanism_reps"])
        variants = [(False, 0.95)] + ([(True, 0.95)] if s.timestamps else [])
        if s.name == "iid_normal" and plan.get("extra_confidence"):
            variants += [(stamps, plan["extra_confidence"]) for stamps, _ in variants]
        out += [(s, n, reps, variants) for n in ns]
    return out


def measure(plan: dict, only: set[str] | None = None, log=print, config: dict | None = None) -> dict:
    """Every planned case through the service, the batch part, and the targets judged."""
    started = time.time()
    service = consult.Service(config)
    results: dict = {"seed": BASE_SEED, "plan": {k: list(v) if isinstance(v, tuple) else v for k, v in plan.items()},
                     "vocabulary": {"structure_kinds": list(service.structure_kinds),
                                    "advice_has_code": service.advice_has_code},
                     "cases": [], "batch": None}
    with threadpool_limits(1):  # as every service worker runs (gunicorn_conf)
        for scenario, n, reps, variants in plan_cases(plan, only):
            cases = ms.run_scenario(service, scenario, n, reps, variants)
            for c in cases:
                log(f"{targets.label(c)}: {c['answered']} answered, not white noise"
                    f" {pct(c['rates']['not_white_noise'])} ({c['seconds']:.1f} s)")
            results["cases"] += cases
        if not only or "batch" in only:
            results["batch"] = ms.run_batches(service, plan["noise_batches"], plan["ar_batches"])
            log(f"batches: {results['batch']['seconds']:.1f} s; false-discovery reading found:"
                f" {results['batch']['available']}")
    results["targets"] = targets.evaluate(results)
    results["wall_seconds"] = time.time() - started
    return results


def main(argv=None) -> dict:
    argv = sys.argv[1:] if argv is None else list(argv)
    parser = argparse.ArgumentParser(prog="python -m calibration.run", description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=None, help="series per case, every scenario")
    parser.add_argument("--batches", type=int, default=None, help="pure-noise batches (a quarter as many AR batches)")
    parser.add_argument("--quick", action="store_true", help="tiny sizes, to check the code runs")
    parser.add_argument("--only", nargs="+", choices=[*SCENARIOS, "batch"], default=None, metavar="NAME",
                        help=f"run only these: {', '.join(SCENARIOS)}, batch")
    parser.add_argument("--out", type=Path, default=ROOT / "CALIBRATION.md")
    ns = parser.parse_args(argv)
    plan = dict(QUICK if ns.quick else FULL)
    if ns.reps:
        plan.update(iid_reps=ns.reps, power_reps=ns.reps, mechanism_reps=ns.reps)
    if ns.batches:
        plan.update(noise_batches=ns.batches, ar_batches=max(1, ns.batches // 4))
    results = measure(plan, set(ns.only) if ns.only else None)
    results.update(command=" ".join(["python -m calibration.run", *argv]), quick=ns.quick, only=ns.only,
                   date=f"{dt.datetime.now(dt.UTC):%Y-%m-%d %H:%M} UTC", commit=git_commit(),
                   machine=machine.describe())
    previous = ns.out.read_text() if ns.out.exists() else ""
    ns.out.write_text(render(results, previous))
    ns.out.with_suffix(".json").write_text(json.dumps(results, indent=1) + "\n")
    print(f"wrote {ns.out} and {ns.out.with_suffix('.json')}")
    return results


if __name__ == "__main__":
    main()

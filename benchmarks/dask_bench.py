"""Series per second on Dask (a local cluster of 2 worker processes) against the single-process batch, side by side.

    python -m benchmarks.dask_bench                  # 200,000 series x 120 points; rewrites its BENCHMARKS.md section
    python -m benchmarks.dask_bench --quick --no-write   # tiny sizes, to check that the code runs

The data: seeded, invented sensor-like series (:func:`benchmarks.workloads.batch`: white noise, AR(1), a cycle),
integer ids, one row per series and day (daily stamps, so each series' seasonal period 7 is read from its
timestamps, as the service reads it), the rows ordered by day as a daily export would be. The same frame goes
to :func:`lagsight.diagnose_many` in this process and, split by row position into ``--inputs`` pieces held by
the workers, to :func:`lagsight.distributed.diagnose_dask`, which shuffles it on the id first. Two clusters,
each ``LocalCluster(n_workers=2, threads_per_worker=1, processes=True)`` on the same machine: one whose workers
keep freed memory as the service's workers do (:func:`worker_environment`), one with Dask's default worker
environment. Each round times the three cases one after the other (this process waits while a cluster works),
after a warm-up on 60 series (the workers import the package); the tables are compared once (they must be
equal). BLAS runs one thread everywhere (as in the service's workers).

The section of BENCHMARKS.md between the ``dask-bench`` markers is rewritten (``benchmarks.report`` keeps it
when ``make bench`` regenerates the rest of the file).
"""
from __future__ import annotations

import argparse
import datetime as dt
import statistics
import time
from contextlib import ExitStack
from importlib import metadata
from pathlib import Path

import numpy as np
import pandas as pd
from threadpoolctl import threadpool_limits

from benchmarks import machine, workloads
from benchmarks.report import DASK_END, DASK_START
from benchmarks.sections import replace_section
from lagsight import config
from lagsight.serving import heap

ROOT = Path(__file__).resolve().parents[1]


def long_frame(m: int, n: int) -> pd.DataFrame:
    """m series of n daily values in the long format, ordered by day (then id)."""
    x = workloads.batch(m, n)
    days = pd.date_range("2025-01-01", periods=n, freq="D")
    return pd.DataFrame({"id": np.tile(np.arange(m, dtype=np.int64), n), "day": np.repeat(days.values, m),
                         "value": x.T.ravel()})


def _same_tables(a: pd.DataFrame, b: pd.DataFrame) -> bool:
    a = a.sort_values("id").reset_index(drop=True)
    b = b.sort_values("id").reset_index(drop=True)
    try:
        pd.testing.assert_frame_equal(a, b)
    except AssertionError:
        return False
    return True


def _process_cpu() -> float:
    """CPU seconds (user and system) of the process it runs in (a worker's, the scheduler's, this one's)."""
    import psutil

    times = psutil.Process().cpu_times()
    return times.user + times.system


def _cluster_cpu(client) -> float:
    return sum(client.run(_process_cpu).values()) + client.run_on_scheduler(_process_cpu) + _process_cpu()


def worker_environment() -> dict:
    """Dask's environment for new workers, with the allocator kept as the service keeps it in its workers.

    Dask's nanny starts workers with ``MALLOC_TRIM_THRESHOLD_=65536`` (freed memory goes back to the kernel at
    once); setting it also freezes glibc's mmap threshold at 128 KiB, so every array of an engine block is
    mapped and unmapped again. The service's workers keep up to ``HEAP_KEEP_MB`` (64) MiB instead
    (:mod:`lagsight.serving.heap`); these are the same two thresholds as environment variables.
    """
    import dask

    keep = config.load()["HEAP_KEEP_MB"] << 20
    arrays = min(max(keep // heap.HEAP_SHARE, 128 << 10), heap.MMAP_THRESHOLD_MAX)
    return {**dask.config.get("distributed.nanny.pre-spawn-environ"),
            "MALLOC_TRIM_THRESHOLD_": keep, "MALLOC_MMAP_THRESHOLD_": arrays}


CASES = {"single": "single process, `diagnose_many`",
         "dask": "Dask, 2 workers, `diagnose_dask(...).compute()`, workers keeping freed memory as the service does",
         "dask_default": "the same with Dask's default worker environment (`MALLOC_TRIM_THRESHOLD_=65536`)"}


def measure(m: int, n: int, inputs: int, partitions: int, rounds: int, detail: str) -> dict:
    import dask
    import dask.dataframe as dd
    from distributed import Client, LocalCluster

    import lagsight
    from lagsight.distributed import diagnose_dask

    frame = long_frame(m, n)
    heap.keep_freed_memory(config.load()["HEAP_KEEP_MB"])  # this process as a service worker is
    load_start = machine.load_average()
    runs: dict[str, list[float]] = {key: [] for key in CASES}
    cpu: dict[str, list[float]] = {key: [] for key in CASES}
    equal = {}
    bounds = np.linspace(0, len(frame), inputs + 1).astype(int).tolist()
    few = long_frame(60, n)
    with ExitStack() as stack:
        clusters = {}
        for key, environ in (("dask", worker_environment()), ("dask_default", None)):
            with dask.config.set({"distributed.nanny.pre-spawn-environ": environ} if environ else {}):
                cluster = stack.enter_context(LocalCluster(
                    n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                    scheduler_kwargs={"dashboard_address": "127.0.0.1:0"}))  # not port 8787, which others may hold
            client = stack.enter_context(Client(cluster, set_as_default=False))
            # split by row position: with the rows ordered by day, every piece holds every id
            pieces = client.scatter([frame.iloc[a:b] for a, b in zip(bounds, bounds[1:])])
            client.gather(pieces)  # wait until every piece is held
            clusters[key] = (client, dd.from_delayed(pieces, meta=frame.iloc[:0]))
        with threadpool_limits(1):
            # warm up: the workers import the package and the engine's tables load, outside the timing
            lagsight.diagnose_many(few, id="id", time="day", value="value", detail=detail)
            for client, _ in clusters.values():
                with client.as_current():
                    diagnose_dask(dd.from_pandas(few, npartitions=2), id="id", time="day", value="value",
                                  detail=detail, npartitions=2).compute()
            for r in range(rounds):
                start, used = time.perf_counter(), _process_cpu()
                single = lagsight.diagnose_many(frame, id="id", time="day", value="value", detail=detail)
                runs["single"].append(time.perf_counter() - start)
                cpu["single"].append(_process_cpu() - used)
                for key, (client, ddf) in clusters.items():
                    with client.as_current():
                        start, used = time.perf_counter(), _cluster_cpu(client)
                        spread = diagnose_dask(ddf, id="id", time="day", value="value", detail=detail,
                                               npartitions=partitions).compute()
                        runs[key].append(time.perf_counter() - start)
                        cpu[key].append(_cluster_cpu(client) - used)
                    if r == 0:
                        equal[key] = _same_tables(spread, single)
                print(f"round {r + 1}: " + ", ".join(f"{k} {v[-1]:.1f} s" for k, v in runs.items()), flush=True)
    return {
        "m": m, "n": n, "inputs": inputs, "partitions": partitions, "rounds": rounds, "detail": detail,
        "equal": all(equal.values()), "runs": runs, "cpu": cpu, "load_start": load_start, "load_end": machine.load_average(),
        "white_noise": int(single["white_noise"].sum()), "errors": int(single["error"].notna().sum()),
    }


def section(r: dict) -> str:
    m = r["m"]
    med = {k: statistics.median(v) for k, v in r["runs"].items()}
    ratio = statistics.median(s / d for s, d in zip(r["runs"]["single"], r["runs"]["dask"]))
    default = statistics.median(s / d for s, d in zip(r["runs"]["single"], r["runs"]["dask_default"]))
    info = machine.describe()
    versions = ", ".join(f"{p} {metadata.version(p)}" for p in ("dask", "distributed", "pandas", "numpy"))

    cpu = {k: statistics.median(v) for k, v in r["cpu"].items()}

    def row(name: str, key: str) -> str:
        v = r["runs"][key]
        return (f"| {name} | {med[key]:,.1f} s | {min(v):,.1f} s | {max(v):,.1f} s | {m / med[key]:,.0f} | "
                f"{cpu[key]:,.1f} s | {cpu[key] / med[key]:.2f} |")

    return "\n".join([
        DASK_START,
        f"## Dask: {m:,} series x {r['n']} points",
        "",
        "Measured by `python -m benchmarks.dask_bench` (this section only; `make bench` keeps it). "
        f"Run {dt.datetime.now(dt.timezone.utc):%Y-%m-%d %H:%M} UTC on {info['cpu']}, {info['cores']} cores; "
        f"{versions}. Load average at start {_load(r['load_start'])}, at end {_load(r['load_end'])}: the machine is "
        "shared, read the ratios (the three cases run one after the other in each round).",
        "",
        f"A long table of {m * r['n']:,} rows (id, day, value; daily stamps, so each series' period 7 comes from its "
        f"timestamps), `detail: \"{r['detail']}\"`. Single process: `lagsight.diagnose_many` on the pandas frame. "
        f"Dask: the same rows split by position into {r['inputs']} pieces held by a local cluster of 2 worker "
        f"processes with one thread each (`LocalCluster(n_workers=2, threads_per_worker=1, processes=True)`) on "
        f"the same 2 cores (two such clusters, one per worker environment below); `lagsight.distributed.diagnose_dask` shuffles them on the id into {r['partitions']} "
        "partitions, runs each through the batch path and brings the q-values across all series back; the table "
        "is computed to this process. Median of the rounds:",
        "",
        "| case | median | min | max | series/s | CPU time | cores used (CPU time / wall time) |",
        "| --- | --- | --- | --- | --- | --- | --- |",
        *(row(name, key) for key, name in CASES.items()),
        "",
        f"Dask is {ratio:.2f}x the single process (median of the per-round ratios over {r['rounds']} rounds), "
        f"{default:.2f}x with Dask's default worker environment; the tables are "
        f"{'equal' if r['equal'] else '**not equal**'} ({r['white_noise']:,} series called white noise, "
        f"{r['errors']} errors). Two workers on two cores can at most double the single process; what they lose to "
        f"that bound is the shuffle, the transfers and the machine's other load: the cluster spent {cpu['dask']:,.1f} "
        f"CPU seconds (workers, scheduler and this process) where the single process spent {cpu['single']:,.1f} "
        f"({cpu['dask'] / cpu['single']:.2f}x), and the cluster ran on {cpu['dask'] / med['dask']:.2f} cores on "
        "average while other work shared the machine. The single process and the first "
        "cluster's workers keep freed memory as the service's workers do (`LAGSIGHT_HEAP_KEEP_MB`, 64 MiB; for the "
        "workers as `MALLOC_TRIM_THRESHOLD_` and `MALLOC_MMAP_THRESHOLD_`, see docs/DASK.md).",
        DASK_END,
    ])


def _load(values) -> str:
    return "n/a" if values is None else ", ".join(f"{v:.2f}" for v in values)


def write(text: str, path: Path) -> None:
    """Replace the section between the markers, or put it before the analysis."""
    replace_section(path, text, DASK_START, DASK_END)


def main(argv=None) -> dict:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--series", type=int, default=200_000)
    parser.add_argument("--points", type=int, default=120)
    parser.add_argument("--inputs", type=int, default=8, help="row-position pieces the cluster starts from")
    parser.add_argument("--partitions", type=int, default=8, help="partitions after the shuffle on the id")
    parser.add_argument("--rounds", type=int, default=2)
    parser.add_argument("--detail", choices=("full", "brief"), default="full")
    parser.add_argument("--quick", action="store_true", help="tiny sizes, one round")
    parser.add_argument("--out", type=Path, default=ROOT / "BENCHMARKS.md")
    parser.add_argument("--no-write", action="store_true")
    args = parser.parse_args(argv)
    if args.quick:
        args.series, args.inputs, args.partitions, args.rounds = 300, 3, 2, 1
    result = measure(args.series, args.points, args.inputs, args.partitions, args.rounds, args.detail)
    text = section(result)
    print(text)
    if not args.no_write:
        write(text, args.out)
    return result


if __name__ == "__main__":
    main()

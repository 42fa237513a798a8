"""Repeat, interleave, take medians."""
from __future__ import annotations

import statistics
import time
from collections.abc import Callable


def seconds(fn: Callable[[], object]) -> float:
    start = time.perf_counter()
    fn()
    return time.perf_counter() - start


def interleaved(cases: dict[str, Callable[[], object]], repeats: int, warmup: bool = True) -> dict[str, dict]:
    """Time every case once per round, rounds repeated; side by side, so a busy moment hits all of them.

    Returns name -> {"median": s, "min": s, "max": s, "runs": [...]}.
    """
    if warmup:
        for fn in cases.values():
            fn()
    runs: dict[str, list[float]] = {name: [] for name in cases}
    for _ in range(repeats):
        for name, fn in cases.items():
            runs[name].append(seconds(fn))
    return {name: summary(values) for name, values in runs.items()}


def summary(values: list[float]) -> dict:
    return {"median": statistics.median(values), "min": min(values), "max": max(values), "runs": values}

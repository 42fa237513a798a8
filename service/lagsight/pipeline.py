"""The one-way flow for one or many series: series -> engine -> report -> interpretation.

Series that share a length and options are stacked and analysed together as
one 2-D array; a single request is a batch of one, so both paths run the same code.
"""
from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass

import numpy as np

from . import metrics, options
from .engine.analysis import analyse
from .interpretation import interpret
from .problems import invalid
from .report import build_report
from .series import PreparedSeries, resolve_max_lag


@dataclass(frozen=True)
class Plan:
    """Everything that decides the arithmetic for one series; equal plans share one engine pass."""

    n: int
    max_lag: int
    confidence: float
    model_df: int
    test_lags: tuple[int, ...]


def plan_for(series: PreparedSeries, opts: dict, max_lag_limit: int) -> Plan:
    """Resolve the defaults that depend on the data (max_lag, portmanteau lags)."""
    n = series.n
    if opts["model_df"] >= n:  # also keeps absurd integers (beyond 64 bits) out of the arithmetic
        raise invalid("/model_df", f"model_df (parameters of the fitted model) must be less than the number of "
                                   f"usable values ({n}), got {opts['model_df']}.")
    max_lag = resolve_max_lag(opts.get("max_lag"), n, series.period, max_lag_limit)
    lags = options.portmanteau_lags(n, max_lag, series.period, opts["model_df"])
    return Plan(n, max_lag, opts["confidence"], opts["model_df"], tuple(lags))


def run(items: list[tuple[PreparedSeries, Plan]]) -> list[dict]:
    """Reports for prepared series, in the order given."""
    groups: dict[Plan, list[int]] = defaultdict(list)
    for i, (_, plan) in enumerate(items):
        groups[plan].append(i)
    reports: list[dict | None] = [None] * len(items)
    for plan, members in groups.items():
        x = np.stack([items[i][0].values for i in members])
        result = analyse(x, plan.max_lag, plan.confidence, plan.model_df, list(plan.test_lags))
        for row, i in enumerate(members):
            reports[i] = interpret(build_report(items[i][0], result, row))
    metrics.record_analysed(len(items), sum(series.n for series, _ in items))
    return reports

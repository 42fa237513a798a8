"""The one-way flow for one or many series: series -> engine -> report -> interpretation.

Series that share a length and options are stacked and analysed together as
one 2-D array; a single request is a batch of one, so both paths run the same code.
"""
from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass

import numpy as np

from . import options
from .engine.analysis import analyse
from .interpretation import interpret
from .report import build_report
from .series import PreparedSeries, limit_to_paired_lags, resolve_max_lag


@dataclass(frozen=True)
class Plan:
    """Everything that decides the arithmetic for one series; equal plans share one engine pass."""

    n: int
    max_lag: int
    confidence: float
    model_df: int
    test_lags: tuple[int, ...]
    length: int = 0  # time-grid length; differs from n when observations are missing
    pairwise: bool = False  # missing observations analysed with the amplitude-modulated estimator


def plan_for(series: PreparedSeries, opts: dict, max_lag_limit: int) -> Plan:
    """Resolve the defaults that depend on the data (max_lag, portmanteau lags)."""
    n = series.n
    mask = series.mask
    max_lag = resolve_max_lag(opts.get("max_lag"), series.length if mask is not None else n, series.period,
                              max_lag_limit)
    if mask is not None:
        max_lag = limit_to_paired_lags(series, mask, max_lag, opts.get("max_lag") is not None)
    lags = options.portmanteau_lags(n, max_lag, series.period, opts["model_df"])
    return Plan(n, max_lag, opts["confidence"], opts["model_df"], tuple(lags), series.length, mask is not None)


def run(items: list[tuple[PreparedSeries, Plan]]) -> list[dict]:
    """Reports for prepared series, in the order given."""
    groups: dict[Plan, list[int]] = defaultdict(list)
    for i, (_, plan) in enumerate(items):
        groups[plan].append(i)
    reports: list[dict | None] = [None] * len(items)
    for plan, members in groups.items():
        x = np.stack([items[i][0].values for i in members])
        mask = ~np.isnan(x) if plan.pairwise else None
        result = analyse(x, plan.max_lag, plan.confidence, plan.model_df, list(plan.test_lags), mask=mask)
        for row, i in enumerate(members):
            reports[i] = interpret(build_report(items[i][0], result, row))
    return reports

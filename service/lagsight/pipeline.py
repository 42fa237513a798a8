"""The one-way flow for one or many series: series -> engine -> report -> interpretation.

Series that share a length and options are stacked and analysed together as
one 2-D array; a single request is a batch of one, so both paths run the same code.
"""
from __future__ import annotations

import secrets
from collections import defaultdict

import numpy as np

from . import metrics, options
from .engine.analysis import Spec, analyse
from .interpretation import interpret
from .problems import invalid
from .report import build_report
from .series import PreparedSeries, resolve_max_lag


def plan_for(series: PreparedSeries, opts: dict, limits: dict) -> Spec:
    """Resolve the defaults that depend on the data and check the limits that depend on n.

    ``limits`` holds MAX_LAG, MAX_REPLICATES and MAX_SIMULATED_VALUES (deployment settings).
    """
    n = series.n
    max_lag = resolve_max_lag(opts.get("max_lag"), n, series.period, limits["MAX_LAG"])
    tests = tuple(t for t in options.TEST_NAMES if t in (opts.get("tests") or options.DEFAULT_TESTS))
    monte_carlo = opts.get("p_values", options.DEFAULT_P_VALUES) == "monte_carlo"
    replicates = opts.get("replicates", options.DEFAULT_REPLICATES) if monte_carlo else 0
    seed = opts.get("seed")
    if monte_carlo:
        if replicates > limits["MAX_REPLICATES"]:
            raise invalid("/replicates", f"replicates must be at most {limits['MAX_REPLICATES']} "
                                         f"(this deployment's limit), got {replicates}.")
        if replicates * n > limits["MAX_SIMULATED_VALUES"]:
            most = max(limits["MAX_SIMULATED_VALUES"] // n, 0)
            raise invalid("/replicates", f"replicates x n = {replicates * n} exceeds this deployment's limit of "
                                         f"{limits['MAX_SIMULATED_VALUES']} simulated values; use at most {most} "
                                         "replicates for this series, or asymptotic p-values.")
        if seed is None:
            seed = secrets.randbits(63)  # reported back so the result can be reproduced
    return Spec(
        max_lag=max_lag,
        confidence=opts["confidence"],
        model_df=opts["model_df"],
        test_lags=tuple(options.portmanteau_lags(n, max_lag, series.period, opts["model_df"])),
        short_lag=options.short_lag(n, max_lag, series.period),
        period=series.period,
        band=opts.get("band", options.DEFAULT_BAND),
        tests=tests,
        p_values="monte_carlo" if monte_carlo else "asymptotic",
        replicates=replicates,
        seed=seed,
    )


def run(items: list[tuple[PreparedSeries, Spec]]) -> list[dict]:
    """Reports for prepared series, in the order given."""
    groups: dict[tuple[int, Spec], list[int]] = defaultdict(list)
    for i, (series, spec) in enumerate(items):
        groups[(series.n, spec)].append(i)
    reports: list[dict | None] = [None] * len(items)
    for (_, spec), members in groups.items():
        x = np.stack([items[i][0].values for i in members])
        result = analyse(x, spec)
        for row, i in enumerate(members):
            reports[i] = interpret(build_report(items[i][0], result, row))
    metrics.record_analysed(len(items), sum(series.n for series, _ in items))
    return reports

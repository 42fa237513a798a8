"""The one-way flow for one or many series: inputs (prepared series) -> engine -> consult -> outputs.

Series that share a length and options are stacked and analysed together as
one 2-D array; a single request is a batch of one, so both paths run the same code.
Large groups are cut into blocks of at most ``BLOCK_POINTS`` values, which bounds
the engine's working memory and lets a streaming response send results while
later blocks compute. Each row's numbers do not depend on the other rows of its
block, so the blocking changes no result.

Small blocks (a batch of many lengths has one per length) are gathered into chunks of
about ``BLOCK_POINTS`` values that run as one engine pass over several groups
(:func:`lagsight.engine.family.analyse_groups`): the partial autocorrelations and the
seasonal strengths are computed over the rows of the whole chunk. The partial
autocorrelations are the same bit for bit; the seasonal strengths agree with a block's
own pass to rounding (tests/test_family.py checks a batch against the single route).
"""
from __future__ import annotations

import gc
import secrets
from collections import defaultdict
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np

from lagsight import options
from lagsight.consult.decision import decide_block
from lagsight.consult.reading import interpret
from lagsight.engine.analysis import Spec, analyse
from lagsight.engine.family import analyse_groups, prepare_null_tables
from lagsight.inputs.series import PreparedSeries, limit_to_paired_lags, resolve_max_lag
from lagsight.outputs import digits as rounding
from lagsight.outputs.brief import brief_results
from lagsight.outputs.report import build_reports
from lagsight.problems import invalid

#: The default tests in report order (as plan_for orders any requested set).
_DEFAULT_TESTS = tuple(t for t in options.TEST_NAMES if t in options.DEFAULT_TESTS)
#: Values per engine block (2**18 float64 = 2 MiB per copy of the data).
BLOCK_POINTS = 1 << 18


@dataclass(frozen=True)
class Plan:
    """Everything that decides the arithmetic for one series; equal plans share one engine pass."""

    n: int
    spec: Spec
    length: int = 0  # time-grid length; differs from n when observations are missing
    pairwise: bool = False  # missing observations analysed with the amplitude-modulated estimator
    filled: bool = False  # interpolated values that the verdict's evidence leaves out


def plan_for(series: PreparedSeries, opts: dict, limits) -> Plan:
    """Resolve the defaults that depend on the data and check the limits that depend on n.

    ``opts`` holds the loaded analysis options (with ``detail`` "brief" the engine leaves out
    what only the full report reads); ``limits`` is a mapping with MAX_LAG,
    MAX_REPLICATES and MAX_SIMULATED_VALUES (the deployment settings).
    """
    n = series.n
    if opts["model_df"] >= n:  # also keeps absurd integers (beyond 64 bits) out of the arithmetic
        raise invalid("/model_df", f"model_df (parameters of the fitted model) must be less than the number of "
                                   f"usable values ({n}), got {opts['model_df']}.")
    mask = series.mask
    max_lag = resolve_max_lag(opts.get("max_lag"), series.length if mask is not None else n, series.period,
                              limits["MAX_LAG"])
    if mask is not None:
        max_lag = limit_to_paired_lags(series, mask, max_lag, opts.get("max_lag") is not None)
    horizon = opts.get("horizon", options.DEFAULT_HORIZON)
    if horizon > max_lag:
        raise invalid("/horizon", f"horizon must be at most max_lag ({max_lag}) so that a lag is left to test "
                                  f"(lags horizon to max_lag are tested), got {horizon}; raise max_lag or lower horizon.")
    chosen = opts.get("tests")
    tests = tuple(t for t in options.TEST_NAMES if t in chosen) if chosen else _DEFAULT_TESTS
    monte_carlo = opts.get("p_values", options.DEFAULT_P_VALUES) == "monte_carlo"
    replicates = opts.get("replicates", options.DEFAULT_REPLICATES) if monte_carlo else 0
    seed = opts.get("seed")
    if monte_carlo and horizon > 1:
        raise invalid("/p_values", "Monte Carlo p-values simulate an i.i.d. null; with a horizon above 1 the null is a "
                                   "moving average of unknown coefficients: use asymptotic p-values.")
    if monte_carlo and mask is not None:
        raise invalid("/p_values", "Monte Carlo p-values need a complete series; with missing values use "
                                   "missing \"interpolate\", or asymptotic p-values.")
    if monte_carlo:
        if replicates > limits["MAX_REPLICATES"]:
            raise invalid("/replicates", f"replicates must be at most {limits['MAX_REPLICATES']} "
                                         f"(this deployment's limit), got {replicates}.")
        if replicates * n > limits["MAX_SIMULATED_VALUES"]:
            most = limits["MAX_SIMULATED_VALUES"] // n
            raise invalid("/replicates", f"replicates x n = {replicates * n} exceeds this deployment's limit of "
                                         f"{limits['MAX_SIMULATED_VALUES']} simulated values; use at most {most} "
                                         "replicates for this series, or asymptotic p-values.")
        if seed is None:
            seed = secrets.randbits(63)  # reported back so the result can be reproduced
    spec = Spec(
        max_lag=max_lag,
        confidence=opts["confidence"],
        model_df=opts["model_df"],
        test_lags=tuple(options.portmanteau_lags(n, max_lag, series.period, opts["model_df"], horizon)),
        short_lag=options.short_lag(n, max_lag, series.period),
        period=series.period,
        band=opts.get("band", options.DEFAULT_BAND),
        tests=tests,
        p_values="monte_carlo" if monte_carlo else "asymptotic",
        replicates=replicates,
        seed=seed,
        report_extras=opts.get("detail", options.DEFAULT_DETAIL) == "full",
        horizon=horizon,
    )
    return Plan(n, spec, series.length, mask is not None, series.filled is not None)


def blocks(items: list[tuple[PreparedSeries, Plan]]) -> list[tuple[Plan, list[int]]]:
    """Group item indices by plan, in order of first appearance, cut into blocks of ``BLOCK_POINTS``."""
    if len(items) == 1:  # the single request: one block, nothing to group
        return [(items[0][1], [0])]
    groups: dict[Plan, list[int]] = defaultdict(list)
    for i, (_, plan) in enumerate(items):
        groups[plan].append(i)
    out = []
    for plan, members in groups.items():
        # A Monte Carlo plan stays whole: each engine pass simulates its own null distribution.
        rows = len(members) if plan.spec.replicates else max(1, BLOCK_POINTS // max(plan.n, plan.length))
        out.extend((plan, members[start:start + rows]) for start in range(0, len(members), rows))
    return out


@contextmanager
def gc_paused():
    """Pause the cyclic garbage collector while building many small, acyclic dicts and lists.

    Reports hold no reference cycles, so reference counting frees them all the same;
    without the pause the collector's repeated full scans cost about twice the
    building itself on a block of thousands of reports (see BENCHMARKS.md).
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def chunks(planned: list[tuple[Plan, list[int]]]) -> list[list[tuple[Plan, list[int]]]]:
    """Blocks gathered, in order, into chunks of at most ``BLOCK_POINTS`` values (one engine pass each); a block
    of ``BLOCK_POINTS`` values or more, and a Monte Carlo block (it simulates its own null), is a chunk alone."""
    out: list[list[tuple[Plan, list[int]]]] = []
    points = 0
    for plan, members in planned:
        size = max(plan.n, plan.length) * len(members)
        if plan.spec.replicates or size >= BLOCK_POINTS:
            out.append([(plan, members)])
            points = BLOCK_POINTS  # the next block starts a new chunk
            continue
        if not out or points + size > BLOCK_POINTS:
            out.append([])
            points = 0
        out[-1].append((plan, members))
        points += size
    return out


def run_blocks(items: list[tuple[PreparedSeries, Plan]], detail: str = options.DEFAULT_DETAIL,
               observe: Callable[[int, int], None] | None = None, digits: int | None = None,
               charts: bool = False) -> Iterator[list[tuple[int, dict]]]:
    """Results chunk by chunk (see :func:`chunks`), as ``(index in items, result)`` pairs, as soon as each chunk
    is done.

    ``detail`` "full" gives full reports; "brief" the brief results of :mod:`lagsight.outputs.brief`,
    built from the same engine pass without the report and its sentences. ``observe(series, points)``,
    when given, is called for each block after its engine pass (the web layer counts the work in its metrics).
    ``digits`` rounds the numbers written (None: full precision); ``charts`` adds the full reports' chart data.
    """
    planned = blocks(items)
    prepare_null_tables([(plan.n, plan.spec) for plan, _ in planned if not (plan.pairwise or plan.filled)])
    for chunk in chunks(planned):
        inputs = []
        for plan, members in chunk:
            if len(members) == 1:  # a view, not a copy: one long series is the memory-heavy case
                x = items[members[0]][0].values[None, :]
            else:
                x = np.stack([items[i][0].values for i in members])
            mask = ~np.isnan(x) if plan.pairwise else None
            filled = np.stack([items[i][0].filled for i in members]) if plan.filled else None
            inputs.append((x, plan.spec, mask, filled))
        if len(inputs) == 1:
            results = [analyse(inputs[0][0], inputs[0][1], mask=inputs[0][2], filled=inputs[0][3])]
        else:
            results = analyse_groups(inputs)
        done = []
        for (plan, members), result in zip(chunk, results):
            block = [items[i][0] for i in members]
            decisions = decide_block(result, [s.n for s in block], [s.period for s in block],
                                     [0 if s.filled is None else int(s.filled.sum()) for s in block])
            if observe is not None:
                observe(len(members), plan.n * len(members))
            with gc_paused():
                if detail == "brief":
                    done.extend(zip(members, brief_results(block, result, decisions, digits)))
                else:
                    reports = build_reports(block, result, digits, charts)
                    answered = [(i, interpret(report, d)) for i, report, d in zip(members, reports, decisions)]
                    if digits is not None:
                        for _, report in answered:
                            report["verdict"] = rounding.tree(report["verdict"], digits)
                    done.extend(answered)
        yield done
        # The caller has taken the chunk's reports: nothing of them is kept through the next pass.
        done = answered = reports = results = inputs = result = None


def run(items: list[tuple[PreparedSeries, Plan]], observe: Callable[[int, int], None] | None = None,
        detail: str = options.DEFAULT_DETAIL, digits: int | None = None, charts: bool = False) -> list[dict]:
    """Results for prepared series, in the order given (see :func:`run_blocks` for the options)."""
    reports: list[dict | None] = [None] * len(items)
    for block in run_blocks(items, detail, observe, digits, charts):
        for i, report in block:
            reports[i] = report
    return reports

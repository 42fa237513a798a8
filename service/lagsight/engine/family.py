"""One engine pass over several groups of series at once (a batch of many lengths).

A batch of series of many lengths has one group (one :class:`.analysis.Spec` and one length) per
distinct length, and each group's own pass pays a fixed cost per step whatever its rows. Two steps
cost most per group and can run over the rows of every group together:

- the partial autocorrelations (a recursion of one NumPy step per lag): the rows of every group with
  the same number of lags go through one recursion; a row's arithmetic does not depend on the other rows
  (:func:`.partial.pacf`), so the values are the same, bit for bit, as in the group's own pass (only for
  groups whose answer is the full report: the brief answer reads no partial autocorrelations);
- the seasonal strengths (an STL decomposition per row): the rows of every group with the same period are
  decomposed together (:func:`.seasonality.stl_strengths_many`), the same decomposition to rounding (about
  1e-15 of the series' scale), far below the 6 reported decimals.

Everything else is each group's own pass (:func:`.analysis.analyse`), unchanged.
"""
from __future__ import annotations

from collections import defaultdict

import numpy as np

from lagsight.engine import seasonality, whiteness
from lagsight.engine.analysis import GroupAnalysis, Spec, analyse
from lagsight.engine.partial import pacf


def analyse_groups(groups: list[tuple[np.ndarray, Spec, np.ndarray | None, np.ndarray | None]]) -> list[GroupAnalysis]:
    """:func:`.analysis.analyse` of each ``(x, spec, mask, filled)``, with the partial autocorrelations and
    seasonal strengths computed across the groups (see the module notes). Monte Carlo specs are not for
    this function (each simulates its own null in its own pass)."""
    results = [analyse(x, spec, mask=mask, filled=filled, deferred=True) for x, spec, mask, filled in groups]
    by_lags: dict[int, list[GroupAnalysis]] = defaultdict(list)
    for result in results:
        if result.spec.report_extras:  # only the full report reads them
            by_lags[result.acf.shape[1]].append(result)
    for members in by_lags.values():
        phi = np.clip(pacf(np.concatenate([g.acf for g in members])), -1.0, 1.0)
        start = 0
        for g in members:
            g.pacf = phi[start:start + g.acf.shape[0]]
            start += g.acf.shape[0]
    by_period: dict[int, list[int]] = defaultdict(list)
    for i, result in enumerate(results):
        if result.seasonal_rows is not None and result.seasonal_rows.size:
            by_period[result.spec.period].append(i)
    for period, members in by_period.items():
        parts = [groups[i][0][results[i].seasonal_rows] for i in members]
        for i, values in zip(members, seasonality.stl_strengths_many(parts, period)):
            for row, value in zip(results[i].seasonal_rows.tolist(), values.tolist()):
                results[i].seasonal_strength[row] = value
    for result in results:
        result.seasonal_rows = None
    return results


def prepare_null_tables(groups: list[tuple[int, Spec]]) -> None:
    """Build the verdict's null tables that complete series of these (length, spec) pairs need, one set of
    simulated draws per length, max_lag, seasonal lags and horizon (:func:`.whiteness.prepare_tables`): each length of a
    batch has its own short lag, and each would otherwise simulate its own draws in its own pass."""
    keys = {(whiteness.simulated_length(n, spec.max_lag), spec.layout) for n, spec in groups}
    if len(keys) > 1:
        whiteness.prepare_tables(keys)

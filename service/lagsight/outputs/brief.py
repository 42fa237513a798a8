"""The brief result of a batch series (``detail: "brief"``), read straight off the engine's arrays.

A portal scanning thousands of series needs, per series, the verdict and the numbers behind
it, not the correlogram lists, bands, periodogram, chart data, sentences and advice of the full
report (about 7 KB of JSON each in a batch). A brief result holds:

- ``name``, ``n``, ``n_missing``, ``max_lag``, ``period``: as in the full report;
- ``verdict``: the full report's verdict object, the same in every field (the decision rule of
  :mod:`lagsight.consult`);
- ``tests``: each test entry reduced to name, lag, df, statistic, p_value, reject and note;
- ``exceedances``: how many autocorrelations lie outside the band and at which lags
  (the full report's ``exceedances.count`` and ``acf.outside``);
- ``seasonal_strength``: the STL strength when it was computed (``seasonal.strength.value``), else null;
- ``warnings``: the full report's warnings.

The general cautions are said once for the whole batch (:func:`batch_cautions`).

Everything is computed a block at a time with NumPy over the rows of a
:class:`~lagsight.engine.analysis.GroupAnalysis`: band exceedances, the standardised spikes
and their argmax, the portmanteau family with its per-row Bonferroni thresholds, the
per-test rejections and the structure flags. Per row, Python only assembles small dicts from
``tolist()`` output and calls the scalar Sidak tail of the verdict rule. tests/test_brief.py
checks field by field that a brief result equals the matching parts of the full report.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np

from lagsight import options
from lagsight.consult.cautions import short_series_warning
from lagsight.consult.decision import Decision
from lagsight.engine.analysis import GroupAnalysis, TestArrays
from lagsight.inputs.series import PreparedSeries
from lagsight.outputs import digits as rounding
from lagsight.outputs.report import test_rows

#: Per-series fields of a brief result, in order (the batch adds ``id``).
FIELDS = ("verdict", "name", "n", "n_missing", "max_lag", "period", "tests", "exceedances", "seasonal_strength",
          "warnings")


def _row_slice(analysis: GroupAnalysis, row: int) -> GroupAnalysis:
    """A one-row view of a group analysis (for the rare null-value notes)."""
    def cut(t: TestArrays) -> TestArrays:
        extras = {k: (v[row:row + 1] if isinstance(v, np.ndarray) else v) for k, v in t.extras.items()}
        return dataclasses.replace(t, statistic=t.statistic[row:row + 1], p_value=t.p_value[row:row + 1],
                                   extreme=t.extreme[row:row + 1],
                                   mc_se=None if t.mc_se is None else t.mc_se[row:row + 1], extras=extras)
    return dataclasses.replace(analysis, acf=analysis.acf[row:row + 1], tests=[cut(t) for t in analysis.tests])


def _test_entries(analysis: GroupAnalysis, alpha: float, digits: int | None = None) -> list[list[dict]]:
    """Every row's test entries: name, lag, df, statistic, p_value, reject, note.

    Built a column (one test at one lag) at a time, then regrouped by row. A note is written
    only where the statistic or the p-value is null. Its text depends on the test, the lag and
    the group, never on the row, so it is taken once per (test, lag) from the full report's own
    builder run on one row that has the null.
    """
    columns = []
    # every test's statistics and p-values rounded in one NumPy pass (rounding.arrays), not two per test
    shown = rounding.arrays([a for t in analysis.tests for a in (t.statistic, t.p_value)], digits)
    for i, t in enumerate(analysis.tests):
        finite = np.isfinite(t.statistic) & np.isfinite(t.p_value)
        stats, exact = shown[2 * i].T.tolist(), t.p_value.T.tolist()
        pvals = exact if digits is None else shown[2 * i + 1].T.tolist()
        for j, lag in enumerate(t.lags):
            name, df = t.name, t.df[j]
            if finite[:, j].all():
                columns.append([{"name": name, "lag": lag, "df": df, "statistic": stat, "p_value": p,
                                 "reject": e < alpha, "note": None}
                                for stat, p, e in zip(stats[j], pvals[j], exact[j])])
                continue
            first = int(np.argmin(finite[:, j]))
            note = [e for e in test_rows(_row_slice(analysis, first))[0] if e["name"] == name][j]["note"]
            column = []
            for stat, p, e in zip(stats[j], pvals[j], exact[j]):
                stat = stat if math.isfinite(stat) else None
                p = p if math.isfinite(p) else None
                column.append({"name": name, "lag": lag, "df": df, "statistic": stat, "p_value": p,
                               "reject": None if p is None else e < alpha,
                               "note": note if stat is None or p is None else None})
            columns.append(column)
    if not columns:
        return [[] for _ in range(analysis.acf.shape[0])]
    return [list(row) for row in zip(*columns)]


def _outside_lags(analysis: GroupAnalysis) -> list[list[int]]:
    """Per row the lags whose autocorrelation lies outside the band (the full report's acf.outside)."""
    band = analysis.acf_band
    r = analysis.acf
    outside = (r < band.lower) | (r > band.upper)
    rows, cols = np.nonzero(outside)
    flat = (cols + 1).tolist()
    ends = np.cumsum(np.bincount(rows, minlength=r.shape[0])).tolist()
    starts = [0, *ends[:-1]]
    return [flat[a:b] for a, b in zip(starts, ends)]


def brief_results(series: list[PreparedSeries], analysis: GroupAnalysis, decisions: list[Decision],
                  digits: int | None = None) -> list[dict]:
    """The brief result of every row of a group analysis; ``series[i]`` is row i (numbers to ``digits``)."""
    spec = analysis.spec
    alpha = 1.0 - spec.confidence
    ns = [s.n for s in series]
    verdicts = [rounding.tree(d.verdict(), digits) for d in decisions]
    tests = _test_entries(analysis, alpha, digits)
    outside = _outside_lags(analysis)
    short = spec.p_values == "asymptotic"
    out = []
    for i, s in enumerate(series):
        warnings = list(s.warnings)
        if short and ns[i] < options.SMALL_SAMPLE_N:
            warnings.append(short_series_warning(ns[i]))
        out.append({
            "verdict": verdicts[i],
            "name": s.name,
            "n": ns[i],
            "n_missing": s.n_missing,
            "max_lag": spec.max_lag,
            "period": s.period,
            "tests": tests[i],
            "exceedances": {"count": len(outside[i]), "outside": outside[i]},
            "seasonal_strength": rounding.value(analysis.seasonal_strength[i], digits),
            "warnings": warnings,
        })
    return out


#: Where the rest of each series' report is (the brief answer says it once).
FULL_REPORT = ("Each series' full report (correlogram and partial correlogram with their bands, periodogram, chart "
               "data, unit-root check, sentences, advice and its own cautions) is the answer to the same request "
               "with detail \"full\", the default.")

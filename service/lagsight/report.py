"""The fixed-shape report for one series: numbers only, every key always present.

Floats that are not defined are ``None`` with a reason beside them, never NaN.
Sentences, the verdict and advice are added by :mod:`lagsight.interpretation`.

Reports are built a group at a time: each array of the group analysis is turned
into Python lists once (``ndarray.tolist`` runs at C speed), then every row's
report takes its slices. Building row by row from NumPy scalars cost about ten
times more on batches of thousands of short series (see BENCHMARKS.md).
"""
from __future__ import annotations

import math

import numpy as np

from .charts import chart_data
from .engine.analysis import GroupAnalysis
from .series import PreparedSeries


def _rows(a: np.ndarray) -> list[list]:
    """Rows of a 2-D float array as lists, with None where a value is not finite."""
    rows = a.tolist()
    if np.isfinite(a).all():
        return rows
    return [[v if math.isfinite(v) else None for v in row] for row in rows]


class _Correlograms:
    """One correlogram (ACF or PACF) of every row of a group, as lists."""

    def __init__(self, lags: list[int], values: np.ndarray, lower: np.ndarray, upper: np.ndarray):
        self.lags = lags
        self.values = _rows(values)
        self.lower = _rows(lower)
        self.upper = _rows(upper)
        mask = ((values < lower) | (values > upper)).tolist()
        self.outside = [[lag for lag, out in zip(lags, row) if out] for row in mask]

    def block(self, row: int) -> dict:
        return {
            "lags": list(self.lags),
            "values": self.values[row],
            "lower": self.lower[row],
            "upper": self.upper[row],
            "outside": self.outside[row],
        }


def _test_rows(analysis: GroupAnalysis) -> list[list[dict]]:
    """The portmanteau entries of every row: a list of test dicts per row."""
    alpha = 1.0 - analysis.confidence
    m = analysis.acf.shape[0]
    out: list[list[dict]] = [[] for _ in range(m)]
    for t in analysis.tests:
        stats = t.statistic.tolist()
        pvals = t.p_value.tolist()
        for j, lag in enumerate(t.lags):
            df = int(t.df[j])
            if df > 0:
                for row in range(m):
                    p = pvals[row][j]
                    out[row].append({"name": t.name, "lag": lag, "df": df, "statistic": stats[row][j],
                                     "p_value": p, "reject": p < alpha, "note": None})
            else:
                note = (f"Not computable: lag {lag} minus model_df {analysis.model_df} leaves "
                        f"{df} degrees of freedom; test at a lag above {analysis.model_df}.")
                for row in range(m):
                    out[row].append({"name": t.name, "lag": lag, "df": None, "statistic": stats[row][j],
                                     "p_value": None, "reject": None, "note": note})
    return out


def _seasonal(series: PreparedSeries, acf_block: dict) -> dict:
    period = series.period
    if period is None:
        return {"period": None, "period_source": None, "lags": [],
                "note": "No seasonal period was given or implied by timestamps."}
    lags = [period * j for j in range(1, 4) if period * j <= len(acf_block["lags"])]
    outside = set(acf_block["outside"])
    entries = [{"lag": lag, "value": acf_block["values"][lag - 1], "outside": lag in outside} for lag in lags]
    note = None if lags else f"max_lag is below the period {period}; raise max_lag to at least {period} to check seasonal lags."
    return {"period": period, "period_source": series.period_source, "lags": entries, "note": note}


def _missing(series: PreparedSeries, analysis: GroupAnalysis, row: int) -> dict:
    block = dict(series.missing)
    if analysis.n_effective is not None:
        block["effective_n"] = _rows(analysis.n_effective[row : row + 1])[0]
    return block


def build_reports(series: list[PreparedSeries], analysis: GroupAnalysis) -> list[dict]:
    """The numeric part of the report of every row of a group analysis; ``series[i]`` is row i."""
    lags = list(range(1, analysis.max_lag + 1))
    acf = _Correlograms(lags, analysis.acf, analysis.acf_lower, analysis.acf_upper)
    pacf = _Correlograms(lags, analysis.pacf, analysis.pacf_lower, analysis.pacf_upper)
    tests = _test_rows(analysis)
    reports = []
    for row, s in enumerate(series):
        acf_block = acf.block(row)
        reports.append({
            "name": s.name,
            "n": s.n,
            "n_input": s.n_input,
            "n_missing": s.n_missing,
            "max_lag": analysis.max_lag,
            "confidence": analysis.confidence,
            "model_df": analysis.model_df,
            "period": s.period,
            "frequency": s.frequency,
            "band": {"kind": "white_noise", "half_width": acf_block["upper"][0]},
            "acf": acf_block,
            "pacf": pacf.block(row),
            "tests": tests[row],
            "seasonal": _seasonal(s, acf_block),
            "verdict": None,
            "interpretation": [],
            "advice": [],
            "cautions": [],
            "warnings": list(s.warnings),
            "missing": _missing(s, analysis, row),
            "transform": s.transform,
        })
        reports[-1]["charts"] = chart_data(s.values, s.labels, reports[-1])
    return reports


def build_report(series: PreparedSeries, analysis: GroupAnalysis, row: int) -> dict:
    """The numeric part of the report for row ``row`` of a group analysis."""
    return build_reports([series], _one_row(analysis, row))[0]


def _one_row(analysis: GroupAnalysis, row: int) -> GroupAnalysis:
    from dataclasses import replace

    pick = slice(row, row + 1)
    return replace(
        analysis,
        acf=analysis.acf[pick], acf_lower=analysis.acf_lower[pick], acf_upper=analysis.acf_upper[pick],
        pacf=analysis.pacf[pick], pacf_lower=analysis.pacf_lower[pick], pacf_upper=analysis.pacf_upper[pick],
        tests=[replace(t, statistic=t.statistic[pick], p_value=t.p_value[pick]) for t in analysis.tests],
        n_effective=None if analysis.n_effective is None else analysis.n_effective[pick],
    )

"""The fixed-shape report for one series: numbers only, every key always present.

Floats that are not defined are ``None`` with a reason beside them, never NaN.
Sentences, the verdict and advice are added by :mod:`lagsight.interpretation`.
"""
from __future__ import annotations

import numpy as np

from .engine.analysis import GroupAnalysis
from .series import PreparedSeries


def _floats(a: np.ndarray) -> list:
    return [float(v) if np.isfinite(v) else None for v in a.tolist()]


def _correlogram(lags: list[int], values, lower, upper) -> dict:
    outside = (values < lower) | (values > upper)
    return {
        "lags": lags,
        "values": _floats(values),
        "lower": _floats(lower),
        "upper": _floats(upper),
        "outside": [lag for lag, out in zip(lags, outside.tolist()) if out],
    }


def _tests(analysis: GroupAnalysis, row: int) -> list[dict]:
    alpha = 1.0 - analysis.confidence
    out = []
    for t in analysis.tests:
        for j, lag in enumerate(t.lags):
            df = int(t.df[j])
            stat = float(t.statistic[row, j])
            if df > 0:
                p = float(t.p_value[row, j])
                out.append({"name": t.name, "lag": lag, "df": df, "statistic": stat, "p_value": p,
                            "reject": bool(p < alpha), "note": None})
            else:
                out.append({"name": t.name, "lag": lag, "df": None, "statistic": stat, "p_value": None,
                            "reject": None,
                            "note": f"Not computable: lag {lag} minus model_df {analysis.model_df} leaves "
                                    f"{df} degrees of freedom; test at a lag above {analysis.model_df}."})
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
        block["effective_n"] = _floats(analysis.n_effective[row])
    return block


def build_report(series: PreparedSeries, analysis: GroupAnalysis, row: int) -> dict:
    """Assemble the numeric part of the report for row ``row`` of a group analysis."""
    lags = list(range(1, analysis.max_lag + 1))
    acf_block = _correlogram(lags, analysis.acf[row], analysis.acf_lower[row], analysis.acf_upper[row])
    pacf_block = _correlogram(lags, analysis.pacf[row], analysis.pacf_lower[row], analysis.pacf_upper[row])
    return {
        "name": series.name,
        "n": series.n,
        "n_input": series.n_input,
        "n_missing": series.n_missing,
        "max_lag": analysis.max_lag,
        "confidence": analysis.confidence,
        "model_df": analysis.model_df,
        "period": series.period,
        "frequency": series.frequency,
        "band": {"kind": "white_noise", "half_width": acf_block["upper"][0]},
        "acf": acf_block,
        "pacf": pacf_block,
        "tests": _tests(analysis, row),
        "seasonal": _seasonal(series, acf_block),
        "verdict": None,
        "interpretation": [],
        "advice": [],
        "cautions": [],
        "warnings": list(series.warnings),
        "missing": _missing(series, analysis, row),
        "transform": series.transform,
    }

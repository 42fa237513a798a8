"""The fixed-shape report for one series: numbers only, every key always present.

Floats that are not defined are ``None`` with a reason beside them, never NaN.
Sentences, the verdict, advice and the one-line meaning of each test are added
by :mod:`lagsight.interpretation`.
"""
from __future__ import annotations

import numpy as np

from .engine.analysis import GroupAnalysis
from .engine.bands import Band, per_lag_confidence
from .series import PreparedSeries

#: A spike is "far" outside when it lies beyond this many standard errors from the band centre.
FAR_SE = 3.0


def _floats(a) -> list:
    a = np.asarray(a, dtype=np.float64)
    return [v if v == v and abs(v) != float("inf") else None for v in a.tolist()]


def _num(v) -> float | None:
    return None if v is None or not np.isfinite(v) else float(v)


def _correlogram(lags: list[int], values: np.ndarray, band: Band, row: int) -> dict:
    centre, se = band.centre[row], band.se[row]
    lower, upper = centre - band.z * se, centre + band.z * se
    outside = (values < lower) | (values > upper)
    far = np.abs(values - centre) > FAR_SE * se
    return {
        "lags": lags,
        "values": _floats(values),
        "lower": _floats(lower),
        "upper": _floats(upper),
        "centre": _floats(centre),
        "standard_error": _floats(se),
        "outside": [k for k, o in zip(lags, outside.tolist()) if o],
        "far": [k for k, o, f in zip(lags, outside.tolist(), far.tolist()) if o and f],
        "marginal": [k for k, o, f in zip(lags, outside.tolist(), far.tolist()) if o and not f],
    }


def _test_entries(analysis: GroupAnalysis, row: int) -> list[dict]:
    alpha = 1.0 - analysis.confidence
    out = []
    for t in analysis.tests:
        for j, lag in enumerate(t.lags):
            stat, p, df = _num(t.statistic[row, j]), _num(t.p_value[row, j]), t.df[j]
            entry = {
                "name": t.name, "lag": lag, "df": df, "statistic": stat, "p_value": p,
                "reject": None if p is None else bool(p < alpha),
                "method": t.method,
                "mc_standard_error": None if t.mc_se is None else _num(t.mc_se[row, j]),
                "details": {k: (_num(v[row]) if isinstance(v, np.ndarray) else v) for k, v in t.extras.items()},
                "meaning": None,
                "note": None,
            }
            if t.name in ("ljung_box", "box_pierce") and df is None:
                entry["note"] = (f"Not computable: lag {lag} minus model_df {analysis.model_df} leaves "
                                 f"{lag - analysis.model_df} degrees of freedom; test at a lag above {analysis.model_df}.")
            elif stat is None or p is None:
                entry["note"] = {
                    "mcleod_li": "Not computable: the squared values do not vary.",
                    "runs": "Not computable: all values lie on one side of the median.",
                    "cumulative_periodogram": "Not computable: the series is too short for two Fourier frequencies.",
                }.get(t.name, "Not computable for this series.")
            out.append(entry)
    return out


def _exceedances(acf_block: dict, alpha_per_lag: float, seasonal_lags: list[int]) -> dict:
    from scipy.stats import binom

    K, k_out = len(acf_block["lags"]), len(acf_block["outside"])
    return {
        "count": k_out,
        "lags_tested": K,
        "expected": alpha_per_lag * K,
        "chance_probability": float(binom.sf(k_out - 1, K, alpha_per_lag)) if k_out else 1.0,
        "far": list(acf_block["far"]),
        "marginal": list(acf_block["marginal"]),
        "seasonal": [lag for lag in acf_block["outside"] if lag in seasonal_lags],
    }


def _seasonal(series: PreparedSeries, analysis: GroupAnalysis, acf_block: dict, row: int) -> dict:
    period = series.period
    strength = analysis.seasonal_strength[row]
    base = {"period": period, "period_source": series.period_source, "lags": [],
            "suggested_period": analysis.suggested_period[row], "strength": None, "leftover_likely": None,
            "note": None}
    if period is None:
        base["note"] = "No seasonal period was given or implied by timestamps." + (
            f" The autocorrelation and the periodogram both point to a cycle of about {base['suggested_period']} "
            "observations: a suggestion to check, not a finding." if base["suggested_period"] else "")
        return base
    outside, far = set(acf_block["outside"]), set(acf_block["far"])
    base["lags"] = [{"lag": lag, "value": acf_block["values"][lag - 1], "outside": lag in outside, "far": lag in far}
                    for lag in analysis.spec.seasonal_lags]
    if not base["lags"]:
        base["note"] = f"max_lag is below the period {period}; raise max_lag to at least {period} to check seasonal lags."
    base["strength"] = {
        "value": strength,
        "method": "stl",
        "note": None if strength is not None else f"Not computed: STL needs at least {2 * period + 1} values for period {period}.",
    }
    return base


def build_report(series: PreparedSeries, analysis: GroupAnalysis, row: int) -> dict:
    """Assemble the numeric part of the report for row ``row`` of a group analysis."""
    spec = analysis.spec
    lags = list(range(1, spec.max_lag + 1))
    acf_block = _correlogram(lags, analysis.acf[row], analysis.acf_band, row)
    pacf_block = _correlogram(lags, analysis.pacf[row], analysis.pacf_band, row)
    per_lag = per_lag_confidence(spec.band, spec.confidence, spec.max_lag)
    constant_width = spec.band in ("white_noise", "simultaneous")
    crit = analysis.ks_critical
    expected = analysis.expected_cumulative
    unit_root = analysis.unit_root[row]
    return {
        "name": series.name,
        "n": series.n,
        "n_input": series.n_input,
        "n_missing": series.n_missing,
        "max_lag": spec.max_lag,
        "confidence": spec.confidence,
        "model_df": spec.model_df,
        "period": series.period,
        "frequency": series.frequency,
        "band": {
            "kind": spec.band,
            "per_lag_confidence": per_lag,
            "z": analysis.acf_band.z,
            "half_width": acf_block["upper"][0] if constant_width else None,
        },
        "acf": acf_block,
        "pacf": pacf_block,
        "exceedances": _exceedances(acf_block, 1.0 - per_lag, list(spec.seasonal_lags)),
        "tests": _test_entries(analysis, row),
        "p_values": {"method": spec.p_values, "replicates": spec.replicates or None, "seed": spec.seed},
        "seasonal": _seasonal(series, analysis, acf_block, row),
        "periodogram": {
            "frequencies": _floats(analysis.frequencies),
            "power": _floats(analysis.power[row]),
            "cumulative": _floats(analysis.cumulative[row]),
            "lower": None if crit is None else _floats(expected - crit),
            "upper": None if crit is None else _floats(expected + crit),
            "binned": bool(analysis.frequencies.size < (series.n - 1) // 2),
        },
        "unit_root": None if unit_root is None else {
            "test": "augmented_dickey_fuller", "statistic": unit_root[0], "p_value": unit_root[1],
            "lags_used": unit_root[2],
        },
        "verdict": None,
        "interpretation": [],
        "advice": [],
        "cautions": [],
        "warnings": list(series.warnings),
    }

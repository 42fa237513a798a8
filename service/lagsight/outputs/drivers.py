"""The answer of POST /v1/driver-check: per driver, the prewhitened cross-correlation with its bands,
Haugh's test, the judgement, the reading and the advice. Every key is always present."""
from __future__ import annotations

import math

from lagsight.consult import drivers as reading
from lagsight.engine.bands import normal_quantile
from lagsight.engine.crosscorrelation import DriverCheck, sidak_z


def driver_block(name: str, n: int, labels: list | None, found: DriverCheck, confidence: float) -> dict:
    alpha = 1.0 - confidence
    level = alpha / 2
    count = found.lags.size
    half = normal_quantile(confidence) / math.sqrt(found.n_used)
    wide = sidak_z(level, count) / math.sqrt(found.n_used)  # Sidak at level alpha / 2
    lags, values = found.lags.tolist(), found.ccf.tolist()
    moves = found.haugh_p < level or found.largest_p < level
    outside = [k for k, r in zip(lags, values) if abs(r) > half]
    beyond = [k for k, r in zip(lags, values) if abs(r) > wide]
    largest = {"lag": found.largest_lag, "value": values[lags.index(found.largest_lag)], "p_value": found.largest_p}
    key = (beyond or [found.largest_lag]) if moves else []
    by_lag = dict(zip(lags, values))
    return {
        "name": name, "n": n, "n_used": found.n_used, "max_lag": int(found.lags[-1]),
        "start_time": labels[0] if labels else None, "end_time": labels[-1] if labels else None,
        "prewhitening": {"ar_order": found.driver_ar.order, "coefficients": found.driver_ar.coefficients.tolist()},
        "series_ar_order": found.series_ar.order,
        "lags": lags, "cross_correlation": values, "lower": -half, "upper": half,
        "simultaneous_lower": -wide, "simultaneous_upper": wide,
        "haugh": {"statistic": found.haugh_statistic, "df": found.haugh_df, "p_value": found.haugh_p,
                  "n": found.haugh_n},
        "largest": largest, "level": level, "moves_with_series": moves,
        "lags_outside": outside, "key_lags": key, "direction": reading.direction(key),
        "reading": reading.reading(name, moves, key, by_lag, found.haugh_p, largest, count),
        "advice": reading.advice(name, moves, key),
    }


def answer(name, n: int, confidence: float, blocks: list[dict]) -> dict:
    lags = max(2 * b["max_lag"] + 1 for b in blocks)
    return {"name": name, "n": n, "confidence": confidence, "drivers": blocks,
            "cautions": reading.cautions(len(blocks), lags, confidence)}

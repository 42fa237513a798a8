"""The verdict rule of :mod:`lagsight.consult.decision`, taken for every row of an engine block at once.

The brief batch answer reads its verdicts from here; tests/test_brief.py checks field by field that they
equal the per-report verdict.
"""
from __future__ import annotations

from itertools import repeat

import numpy as np

from lagsight import options
from lagsight.consult.decision import (
    SUMMARY_CLUSTERING,
    SUMMARY_UNDETERMINED,
    sidak_p,
    summary_not_white,
    summary_white,
)
from lagsight.engine.analysis import GroupAnalysis

_PORTMANTEAU = ("ljung_box", "box_pierce")


#: Verdict structure kinds by bit (1 autocorrelation, 2 seasonal, 4 volatility clustering, 8 non-random order,
#: 16 uneven spectrum), in the order decision.verdict lists them.
_KINDS = ("autocorrelation", "seasonal", "volatility_clustering", "non_random_order", "uneven_spectrum")


_STRUCTURES = [tuple(k for b, k in enumerate(_KINDS) if code >> b & 1) for code in range(32)]


def _max_standardised(z: np.ndarray, lags: list[int]) -> tuple[list[float], list[int]]:
    """Per row the largest standardised value over the given lags and the first lag where it occurs.

    NaN never wins, and a row of NaN gives (-1.0, first lag), as decision.max_standardised does.
    """
    sub = z[:, np.asarray(lags) - 1]
    sub = np.where(np.isnan(sub), -1.0, sub)
    where = np.argmax(sub, axis=1)
    best = sub[np.arange(sub.shape[0]), where]
    return best.tolist(), np.asarray(lags)[where].tolist()


def _rejects(analysis: GroupAnalysis, alpha: float, name: str) -> np.ndarray:
    """Per row: does any entry of the named test reject (p < alpha)?"""
    m = analysis.acf.shape[0]
    hit = np.zeros(m, dtype=bool)
    for t in analysis.tests:
        if t.name == name:
            with np.errstate(invalid="ignore"):
                hit |= (t.p_value < alpha).any(axis=1)
    return hit


def block_verdicts(analysis: GroupAnalysis, ns: list[int], alpha: float) -> list[dict]:
    """The verdict object of every row (decision.verdict's rule, computed over the block)."""
    spec = analysis.spec
    m, K = analysis.acf.shape
    band = analysis.acf_band
    r = analysis.acf
    z = np.abs(r - band.centre) / band.se
    tests = {t.name: t for t in analysis.tests if t.name in _PORTMANTEAU}
    lags = list(spec.test_lags)
    L = len(lags)
    nan = np.full((m, L), np.nan)
    lb = tests["ljung_box"].p_value if "ljung_box" in tests else nan
    bp = tests["box_pierce"].p_value if "box_pierce" in tests else nan
    lb_ok, bp_ok = np.isfinite(lb), np.isfinite(bp)
    use_lb = lb_ok.any(axis=1)
    fam_p = np.where(use_lb[:, None], lb, bp)
    fam_ok = np.where(use_lb[:, None], lb_ok, bp_ok)
    count = fam_ok.sum(axis=1)
    has_port = count > 0
    seasonal_lags = list(spec.seasonal_lags)
    families = 1 + has_port.astype(np.int64) + bool(seasonal_lags)
    level = alpha / families  # (m,)
    threshold = level / np.maximum(count, 1)
    with np.errstate(invalid="ignore"):
        port_against = fam_ok & (fam_p < threshold[:, None])
    z_spike, lag_spike = _max_standardised(z, list(range(1, K + 1)))
    p_spike = np.array(list(map(sidak_p, z_spike, repeat(K))))
    spike_against = p_spike < level
    if seasonal_lags:
        z_season, lag_season = _max_standardised(z, seasonal_lags)
        p_season = np.array(list(map(sidak_p, z_season, repeat(len(seasonal_lags)))))
        season_against = p_season < level
    else:
        p_season = np.full(m, np.nan)
        season_against = np.zeros(m, dtype=bool)
    # Ratios p / threshold over the evidence columns (portmanteau lags, spike, seasonal spike).
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.concatenate([fam_p / threshold[:, None], (p_spike / level)[:, None],
                                (p_season / level)[:, None]], axis=1)
    present = np.concatenate([fam_ok, np.ones((m, 1), bool), np.full((m, 1), bool(seasonal_lags))], axis=1)
    against = np.concatenate([port_against, spike_against[:, None], season_against[:, None]], axis=1)
    any_against = against.any(axis=1)
    worst = np.argmin(np.where(against, ratio, np.inf), axis=1)
    smallest = np.where(present, ratio * alpha, np.inf).min(axis=1)
    best_port = np.argmin(np.where(fam_ok, fam_p, np.inf), axis=1)
    autocorrelation = port_against.any(axis=1) | spike_against
    clustering = _rejects(analysis, alpha, "mcleod_li") & ~autocorrelation
    non_random = _rejects(analysis, alpha, "runs") | _rejects(analysis, alpha, "turning_points")
    uneven = _rejects(analysis, alpha, "cumulative_periodogram")

    # Evidence, a column (one source at one lag) at a time, then regrouped by row.
    names = ["ljung_box" if u else "box_pierce" for u in use_lb.tolist()]
    threshold_l, level_l = threshold.tolist(), level.tolist()
    p_spike_l, p_season_l = p_spike.tolist(), p_season.tolist()
    columns = []
    for j, lag in enumerate(lags):
        ok = fam_ok[:, j]
        column = [{"source": nm, "lag": lag, "p_value": p, "threshold": th, "against_white_noise": a}
                  for nm, p, th, a in zip(names, fam_p[:, j].tolist(), threshold_l, port_against[:, j].tolist())]
        if not ok.all():
            column = [e if keep else None for e, keep in zip(column, ok.tolist())]
        columns.append(column)
    columns.append([{"source": "largest_spike", "lag": lag, "p_value": p, "threshold": lv, "against_white_noise": a}
                    for lag, p, lv, a in zip(lag_spike, p_spike_l, level_l, spike_against.tolist())])
    if seasonal_lags:
        columns.append([{"source": "seasonal_spike", "lag": lag, "p_value": p, "threshold": lv,
                         "against_white_noise": a}
                        for lag, p, lv, a in zip(lag_season, p_season_l, level_l, season_against.tolist())])
    if fam_ok.all():
        evidence = [list(row) for row in zip(*columns)]
    else:
        evidence = [[e for e in row if e is not None] for row in zip(*columns)]
    code = (autocorrelation.astype(np.int64) + 2 * season_against + 4 * clustering + 8 * non_random + 16 * uneven)
    structures = [list(_STRUCTURES[c]) for c in code.tolist()]

    out, todo_white = [], []
    fam_p_rows = None
    for i, (ev, structure, against_i, port_i, worst_i) in enumerate(zip(
            evidence, structures, any_against.tolist(), has_port.tolist(), worst.tolist())):
        if against_i:
            if worst_i < L:
                if fam_p_rows is None:
                    fam_p_rows = fam_p.tolist()
                source, lag, p, th = names[i], lags[worst_i], fam_p_rows[i][worst_i], threshold_l[i]
            elif worst_i == L:
                source, lag, p, th = "largest_spike", lag_spike[i], p_spike_l[i], level_l[i]
            else:
                source, lag, p, th = "seasonal_spike", lag_season[i], p_season_l[i], level_l[i]
            out.append({"white_noise": False, "summary": summary_not_white(source, lag, p), "evidence": ev,
                        "confidence": "strong" if p < th / 10 else "moderate", "structure": structure})
        elif not port_i:
            out.append({"white_noise": None, "summary": SUMMARY_UNDETERMINED, "evidence": ev, "confidence": "none",
                        "structure": structure})
        else:
            out.append({"white_noise": True, "summary": None, "evidence": ev, "confidence": None,
                        "structure": structure})
            todo_white.append(i)
    if todo_white:
        rows = np.array(todo_white)
        moderate = ((smallest[rows] > 4 * alpha) & (np.asarray(ns)[rows] >= options.SMALL_SAMPLE_N)).tolist()
        best_p = fam_p[rows, best_port[rows]].tolist()
        for i, mod, p in zip(todo_white, moderate, best_p):
            v = out[i]
            v["confidence"] = "moderate" if mod else "weak"
            v["summary"] = SUMMARY_CLUSTERING if "volatility_clustering" in v["structure"] else summary_white(names[i], p)
    return out

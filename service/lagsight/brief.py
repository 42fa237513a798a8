"""The brief result of a batch series (``detail: "brief"``), read straight off the engine's arrays.

A portal scanning thousands of series needs, per series, the verdict and the numbers behind
it, not the correlogram lists, bands, periodogram, chart data, sentences and advice of the full
report (about 27 KB of JSON each). A brief result holds:

- ``name``, ``n``, ``n_missing``, ``max_lag``, ``period``: as in the full report;
- ``verdict``: the full report's verdict object, the same in every field (the decision rule of
  :mod:`lagsight.interpretation`);
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
from itertools import repeat

import numpy as np

from . import options
from .engine.analysis import GroupAnalysis, TestArrays
from .interpretation import (SUMMARY_CLUSTERING, SUMMARY_UNDETERMINED, _sidak_p, short_series_warning,
                             summary_not_white, summary_white)
from .report import _test_rows
from .series import PreparedSeries

#: Per-series fields of a brief result, in order (the batch adds ``id``).
FIELDS = ("name", "n", "n_missing", "max_lag", "period", "verdict", "tests", "exceedances", "seasonal_strength",
          "warnings")

_PORTMANTEAU = ("ljung_box", "box_pierce")
#: Verdict structure kinds by bit (1 autocorrelation, 2 seasonal, 4 volatility clustering, 8 non-random order,
#: 16 uneven spectrum), in the order interpretation._structure lists them.
_KINDS = ("autocorrelation", "seasonal", "volatility_clustering", "non_random_order", "uneven_spectrum")
_STRUCTURES = [tuple(k for b, k in enumerate(_KINDS) if code >> b & 1) for code in range(32)]


def _row_slice(analysis: GroupAnalysis, row: int) -> GroupAnalysis:
    """A one-row view of a group analysis (for the rare null-value notes)."""
    def cut(t: TestArrays) -> TestArrays:
        extras = {k: (v[row:row + 1] if isinstance(v, np.ndarray) else v) for k, v in t.extras.items()}
        return dataclasses.replace(t, statistic=t.statistic[row:row + 1], p_value=t.p_value[row:row + 1],
                                   extreme=t.extreme[row:row + 1],
                                   mc_se=None if t.mc_se is None else t.mc_se[row:row + 1], extras=extras)
    return dataclasses.replace(analysis, acf=analysis.acf[row:row + 1], tests=[cut(t) for t in analysis.tests])


def _test_entries(analysis: GroupAnalysis, alpha: float) -> list[list[dict]]:
    """Every row's test entries: name, lag, df, statistic, p_value, reject, note.

    Built a column (one test at one lag) at a time, then regrouped by row. A note is written
    only where the statistic or the p-value is null. Its text depends on the test, the lag and
    the group, never on the row, so it is taken once per (test, lag) from the full report's own
    builder run on one row that has the null.
    """
    columns = []
    for t in analysis.tests:
        finite = np.isfinite(t.statistic) & np.isfinite(t.p_value)
        stats, pvals = t.statistic.T.tolist(), t.p_value.T.tolist()
        for j, lag in enumerate(t.lags):
            name, df = t.name, t.df[j]
            if finite[:, j].all():
                columns.append([{"name": name, "lag": lag, "df": df, "statistic": stat, "p_value": p,
                                 "reject": p < alpha, "note": None} for stat, p in zip(stats[j], pvals[j])])
                continue
            first = int(np.argmin(finite[:, j]))
            note = [e for e in _test_rows(_row_slice(analysis, first))[0] if e["name"] == name][j]["note"]
            column = []
            for stat, p in zip(stats[j], pvals[j]):
                stat = stat if math.isfinite(stat) else None
                p = p if math.isfinite(p) else None
                column.append({"name": name, "lag": lag, "df": df, "statistic": stat, "p_value": p,
                               "reject": None if p is None else p < alpha,
                               "note": note if stat is None or p is None else None})
            columns.append(column)
    if not columns:
        return [[] for _ in range(analysis.acf.shape[0])]
    return [list(row) for row in zip(*columns)]


def _max_standardised(z: np.ndarray, lags: list[int]) -> tuple[list[float], list[int]]:
    """Per row the largest standardised value over the given lags and the first lag where it occurs.

    NaN never wins, and a row of NaN gives (-1.0, first lag), as interpretation._max_standardised does.
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


def _verdicts(analysis: GroupAnalysis, ns: list[int], alpha: float) -> list[dict]:
    """The verdict object of every row (interpretation.verdict's rule, computed over the block)."""
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
    p_spike = np.array(list(map(_sidak_p, z_spike, repeat(K))))
    spike_against = p_spike < level
    if seasonal_lags:
        z_season, lag_season = _max_standardised(z, seasonal_lags)
        p_season = np.array(list(map(_sidak_p, z_season, repeat(len(seasonal_lags)))))
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


def brief_results(series: list[PreparedSeries], analysis: GroupAnalysis) -> list[dict]:
    """The brief result of every row of a group analysis; ``series[i]`` is row i."""
    spec = analysis.spec
    alpha = 1.0 - spec.confidence
    ns = [s.n for s in series]
    verdicts = _verdicts(analysis, ns, alpha)
    tests = _test_entries(analysis, alpha)
    outside = _outside_lags(analysis)
    short = spec.p_values == "asymptotic"
    out = []
    for i, s in enumerate(series):
        warnings = list(s.warnings)
        if short and ns[i] < options.SMALL_SAMPLE_N:
            warnings.append(short_series_warning(ns[i]))
        out.append({
            "name": s.name,
            "n": ns[i],
            "n_missing": s.n_missing,
            "max_lag": spec.max_lag,
            "period": s.period,
            "verdict": verdicts[i],
            "tests": tests[i],
            "exceedances": {"count": len(outside[i]), "outside": outside[i]},
            "seasonal_strength": analysis.seasonal_strength[i],
            "warnings": warnings,
        })
    return out


def batch_cautions(analysed: int, chance_flags: float, any_without_model_df: bool) -> list[str]:
    """The general cautions of a brief batch answer, said once for all its series.

    ``chance_flags`` is the sum of 1 - confidence over the series analysed: the verdict rule
    holds each pure-noise series' chance of being called "not white noise" at or below its
    1 - confidence, so about that many could be flagged by chance if all were white noise.
    """
    out = [
        "A white-noise verdict is not proof of white noise: it says only that the sample gives no strong "
        "evidence of autocorrelation at the lags checked.",
        f"Bands and p-values are large-sample (asymptotic) approximations, rough for short series (below n = "
        f"{options.SMALL_SAMPLE_N} a result with asymptotic p-values carries a short_series warning); p_values "
        "\"monte_carlo\" gives p-values that hold at any length.",
        "Multiple testing: each verdict adjusts for the many lags and tests of its own series (the per-test reject "
        "flags do not), but nothing adjusts across series. Of the "
        f"{analysed} series analysed here, up to about {_count(chance_flags)} could be called not white noise by chance "
        "alone at the chosen confidence even if every one were white noise.",
    ]
    if any_without_model_df:
        out.append("If these values are residuals of fitted ARMA models, set model_df to each model's number of "
                   "estimated parameters (p + q); otherwise the portmanteau p-values are too large.")
    return out


def _count(expected: float) -> str:
    """An expected count for a sentence: whole above 10, one decimal below."""
    return f"{expected:.0f}" if expected >= 10 else f"{expected:.1f}"


#: Where the rest of each series' report is (the brief answer says it once).
FULL_REPORT = ("Each series' full report (correlogram and partial correlogram with their bands, periodogram, chart "
               "data, unit-root check, sentences, advice and its own cautions) is the answer to the same request "
               "with detail \"full\", the default.")

"""The fixed-shape report for one series: numbers only, every key always present.

Floats that are not defined are ``None`` with a reason beside them, never NaN.
Sentences, the verdict, advice and the one-line meaning of each test are added
by :mod:`lagsight.consult`.

Reports are built a group at a time: each array of the group analysis is turned
into Python lists once (``ndarray.tolist`` runs at C speed), then every row's
report takes its slices. Building row by row from NumPy scalars cost about ten
times more on batches of thousands of short series (see BENCHMARKS.md).
"""
from __future__ import annotations

import math

import numpy as np
from scipy.special import bdtrc

from lagsight import options
from lagsight.consult.words import plural
from lagsight.engine import stl
from lagsight.engine.analysis import GroupAnalysis
from lagsight.engine.bands import Band, per_lag_confidence
from lagsight.inputs.series import PreparedSeries
from lagsight.outputs import digits as rounding
from lagsight.outputs.charts import chart_data
from lagsight.outputs.charts import seasonal_flags as chart_seasonal_flags

FAR_SE = options.FAR_OUTSIDE_SE  # standard errors beyond which a spike is "far" outside

_NOT_COMPUTABLE = {
    "mcleod_li": "Not computable: the squared values do not vary.",
    "runs": "Not computable: all values lie on one side of the median.",
    "cumulative_periodogram": "Not computable: the series is too short for two Fourier frequencies.",
}


#: Arrays of at most this many values are checked for non-finite values on their Python lists:
#: a NumPy call costs about a microsecond whatever the size, and one report converts dozens of
#: small arrays (a group of one series is the single request).
_SMALL_ARRAY = 256


def _finite_rows(a: np.ndarray, digits: int | None = None) -> tuple[list[list], bool]:
    """Rows of a 2-D float array as lists (rounded to ``digits`` significant digits when given), and whether
    every value is finite (else None replaces the others)."""
    if digits is not None:
        a = rounding.array(a, digits)
    rows = a.tolist()
    if a.size <= _SMALL_ARRAY:
        # The sum is finite only if every value is; a sum that overflows takes the slow path below,
        # which gives the same rows.
        if math.isfinite(sum(map(sum, rows))):
            return rows, True
    elif np.isfinite(a).all():
        return rows, True
    return [[v if math.isfinite(v) else None for v in row] for row in rows], False


def _rows(a: np.ndarray, digits: int | None = None) -> list[list]:
    """Rows of a 2-D float array as lists, with None where a value is not finite."""
    return _finite_rows(a, digits)[0]


def _list(a: np.ndarray, digits: int | None = None) -> list:
    return _rows(np.asarray(a, dtype=np.float64)[None, :], digits)[0]


class _Correlograms:
    """One correlogram (ACF or PACF) of every row of a group, as lists."""

    def __init__(self, lags: list[int], values: np.ndarray, band: Band, shown: list | None = None):
        self._classify(lags, values, band)
        if shown is not None:  # classified on the numbers as computed, written rounded (values, lower, upper,
            self.values, self.lower, self.upper, self.centre, self.se = (_rows(a) for a in shown)  # centre, se)

    def _classify(self, lags: list[int], values: np.ndarray, band: Band) -> None:
        self.lags = lags
        lower, upper = band.lower, band.upper
        self.values, finite_values = _finite_rows(values)
        self.lower, finite_lower = _finite_rows(lower)
        self.upper, finite_upper = _finite_rows(upper)
        self.centre, finite_centre = _finite_rows(band.centre)
        self.se, finite_se = _finite_rows(band.se)
        if values.size <= _SMALL_ARRAY and finite_values and finite_lower and finite_upper and finite_centre and finite_se:
            # The same comparisons on the same doubles as the array expressions below, without
            # their NumPy calls (which cost more than the loop on a few rows).
            self.outside, self.far = [], []
            for row in zip(self.values, self.lower, self.upper, self.centre, self.se):
                outside_row, far_row = [], []
                for lag, v, lo, up, c, se in zip(lags, *row):
                    if v < lo or v > up:
                        outside_row.append(lag)
                        if abs(v - c) > FAR_SE * se:
                            far_row.append(lag)
                self.outside.append(outside_row)
                self.far.append(far_row)
            return
        outside = (values < lower) | (values > upper)
        far = outside & (np.abs(values - band.centre) > FAR_SE * band.se)
        self.outside = [[lag for lag, o in zip(lags, row) if o] for row in outside.tolist()]
        self.far = [[lag for lag, f in zip(lags, row) if f] for row in far.tolist()]

    def block(self, row: int) -> dict:
        far = set(self.far[row])
        return {
            "lags": list(self.lags),
            "values": self.values[row],
            "lower": self.lower[row],
            "upper": self.upper[row],
            "centre": self.centre[row],
            "standard_error": self.se[row],
            "outside": self.outside[row],
            "far": self.far[row],
            "marginal": [lag for lag in self.outside[row] if lag not in far],
        }


def _band_arrays(band: Band) -> list:
    return [band.lower, band.upper, band.centre, band.se]


def _test_arrays(t) -> list:
    """A test's arrays in the order test_rows reads them: statistic, p_value, mc_se, then its per-row extras."""
    return [t.statistic, t.p_value, t.mc_se, *(v for v in t.extras.values() if isinstance(v, np.ndarray))]


def test_rows(analysis: GroupAnalysis, digits: int | None = None, shown: list | None = None) -> list[list[dict]]:
    """The test entries of every row: a list of test dicts per row (reject read off the unrounded p-value).

    ``shown`` holds each test's arrays (:func:`_test_arrays`) as written, rounded already; without it they
    are rounded here to ``digits``."""
    alpha = 1.0 - analysis.confidence
    m = analysis.acf.shape[0]
    out: list[list[dict]] = [[] for _ in range(m)]
    if shown is None:
        shown = [rounding.arrays(_test_arrays(t), digits) for t in analysis.tests]
    for t, own in zip(analysis.tests, shown):
        arrays = {k: v for k, v in t.extras.items() if isinstance(v, np.ndarray)}
        stats, exact, pvals = _rows(own[0]), _rows(t.p_value), _rows(own[1])
        ses = _rows(own[2]) if t.mc_se is not None else None
        per_row = {k: _list(v) for k, v in zip(arrays, own[3:])}
        constant = {k: rounding.value(v, digits) for k, v in t.extras.items() if k not in arrays}
        for j, lag in enumerate(t.lags):
            df = t.df[j]
            no_df = t.name in ("ljung_box", "box_pierce") and df is None
            for row in range(m):
                stat, p = stats[row][j], pvals[row][j]
                note = None
                if no_df:
                    first = analysis.spec.horizon  # the sums run over lags horizon..lag
                    note = (f"Not computable: model_df {analysis.model_df} uses up the "
                            f"{plural(lag - first + 1, 'lag')} summed up to lag {lag}; test at a lag above "
                            f"{first - 1 + analysis.model_df}.")
                elif stat is None or p is None:
                    note = _NOT_COMPUTABLE.get(t.name, "Not computable for this series.")
                    if t.name == "cumulative_periodogram" and (constant.get("frequencies_tested") or 0) >= 1:
                        note = ("Not computable: the series has no variance at the Fourier frequencies tested "
                                "(all of it sits at frequency 0.5, a strict alternation).")
                    if t.name == "cumulative_periodogram" and analysis.n_effective is not None:
                        note = ("Not computable with missing observations: the periodogram needs a complete, "
                                "evenly spaced series (use missing \"interpolate\" to get it).")
                out[row].append({
                    "name": t.name, "lag": lag, "df": df, "statistic": stat, "p_value": p,
                    "reject": None if p is None else exact[row][j] < alpha,
                    "method": t.method,
                    "mc_standard_error": None if ses is None else ses[row][j],
                    "details": {**constant, **{k: v[row] for k, v in per_row.items()}} if per_row else dict(constant),
                    "meaning": None,
                    "note": note,
                })
    return out


def _exceedances(acf_block: dict, alpha_per_lag: float, seasonal_lags: tuple[int, ...], digits: int | None,
                 horizon: int = 1) -> dict:
    """Lags outside the band among those tested: lags horizon..K (with a horizon, lags below it are not tested)."""
    if horizon > 1:
        acf_block = {key: [lag for lag in acf_block[key] if lag >= horizon] for key in ("lags", "outside", "far",
                                                                                         "marginal")}
    K, k_out = len(acf_block["lags"]), len(acf_block["outside"])
    return {
        "count": k_out,
        "lags_tested": K,
        "expected": rounding.value(alpha_per_lag * K, digits),
        "chance_probability": rounding.value(float(bdtrc(k_out - 1, K, alpha_per_lag)), digits) if k_out else 1.0,
        "far": list(acf_block["far"]),
        "marginal": list(acf_block["marginal"]),
        "seasonal": [lag for lag in acf_block["outside"] if lag in seasonal_lags],
    }


def _seasonal(series: PreparedSeries, analysis: GroupAnalysis, acf_block: dict, row: int, n: int,
              seasonal_lags: tuple[int, ...], digits: int | None = None) -> dict:
    period = series.period
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
                    for lag in seasonal_lags]
    if not base["lags"]:
        base["note"] = f"max_lag is below the period {period}; raise max_lag to at least {period} to check seasonal lags."
    strength = analysis.seasonal_strength[row]
    base["strength"] = {
        "value": rounding.value(strength, digits),
        "method": "stl",
        "note": None if strength is not None else (
            f"Not computed: STL needs at least {2 * period + 1} values for period {period}."
            if n < 2 * period + 1 else
            f"Not computed: period {period} needs an STL trend window of {stl.windows(period)[0]} values, above the "
            f"{stl.MAX_TREND_WINDOW} this service decomposes; the seasonal lags above still show the cycle."
            if not stl.supports(period) else "Not computed: STL needs a complete series (use missing "
            "\"interpolate\" to get it)." if analysis.n_effective is not None
            else "Not computed: no seasonal lag lies outside the band, so there is no seasonal pattern to "
                 "measure (on noise the STL strength only describes noise)."),
    }
    return base


def _missing(series: PreparedSeries, analysis: GroupAnalysis, row: int, digits: int | None) -> dict:
    block = dict(series.missing)
    if analysis.n_effective is not None:
        block["effective_n"] = _rows(analysis.n_effective[row : row + 1], digits)[0]
    return block


#: The report's keys in order: the reading first (verdict, advice, sentences, cautions, warnings), then
#: what was analysed, then the numbers. ``interpret`` fills the reading; ``charts`` is null unless asked for.
KEYS = ("verdict", "advice", "interpretation", "cautions", "warnings", "name", "n", "n_input", "n_missing",
        "max_lag", "confidence", "model_df", "horizon", "period", "frequency", "band", "acf", "pacf", "exceedances", "tests",
        "p_values", "seasonal", "periodogram", "unit_root", "missing", "transform", "charts")


def build_reports(series: list[PreparedSeries], analysis: GroupAnalysis, digits: int | None = None,
                  charts: bool = False) -> list[dict]:
    """The numeric part of the report of every row of a group analysis; ``series[i]`` is row i.

    Floats are written to ``digits`` significant digits (None: as computed); the lags outside the
    bands and the tests' reject flags are read off the unrounded numbers. ``charts`` adds the
    chart-ready tables (:mod:`lagsight.outputs.charts`); without it ``charts`` is null.
    """
    spec = analysis.spec
    lags = list(range(1, spec.max_lag + 1))
    crit = analysis.ks_critical
    band_lower = None if crit is None else analysis.expected_cumulative - crit
    band_upper = None if crit is None else analysis.expected_cumulative + crit
    # Every array written, rounded in one call (a NumPy call costs about the same whatever its size).
    parts = [[analysis.acf, *_band_arrays(analysis.acf_band)], [analysis.pacf, *_band_arrays(analysis.pacf_band)],
             [analysis.frequencies, analysis.power, analysis.cumulative, band_lower, band_upper],
             *(_test_arrays(t) for t in analysis.tests)]
    flat = rounding.arrays([a for part in parts for a in part], digits)
    shown, at = [], 0
    for part in parts:
        shown.append(flat[at:at + len(part)])
        at += len(part)
    acf = _Correlograms(lags, analysis.acf, analysis.acf_band, shown[0] if digits is not None else None)
    pacf = _Correlograms(lags, analysis.pacf, analysis.pacf_band, shown[1] if digits is not None else None)
    tests = test_rows(analysis, digits, shown[3:])
    per_lag = per_lag_confidence(spec.band, spec.confidence, spec.max_lag)
    constant_width = spec.band in ("white_noise", "simultaneous") and analysis.n_effective is None and (
        spec.horizon == 1)
    frequencies = _list(shown[2][0])
    power, cumulative = _rows(shown[2][1]), _rows(shown[2][2])
    lower = None if crit is None else _list(shown[2][3])
    upper = None if crit is None else _list(shown[2][4])
    seasonal_lags = spec.seasonal_lags
    seasonal_flags = chart_seasonal_flags(spec.max_lag, spec.period)
    band_z, band_per_lag = rounding.value(analysis.acf_band.z, digits), rounding.value(per_lag, digits)
    reports = []
    for row, s in enumerate(series):
        acf_block = acf.block(row)
        unit_root = analysis.unit_root[row]
        n = s.n
        report = {
            "verdict": None,
            "advice": [],
            "interpretation": [],
            "cautions": [],
            "warnings": list(s.warnings),
            "name": s.name,
            "n": n,
            "n_input": s.n_input,
            "n_missing": s.n_missing,
            "max_lag": spec.max_lag,
            "confidence": spec.confidence,
            "model_df": spec.model_df,
            "horizon": spec.horizon,
            "period": s.period,
            "frequency": s.frequency,
            "band": {
                "kind": spec.band,
                "per_lag_confidence": band_per_lag,
                "z": band_z,
                "half_width": acf_block["upper"][0] if constant_width else None,
            },
            "acf": acf_block,
            "pacf": pacf.block(row),
            "exceedances": _exceedances(acf_block, 1.0 - per_lag, seasonal_lags, digits, spec.horizon),
            "tests": tests[row],
            "p_values": {"method": spec.p_values, "replicates": spec.replicates or None, "seed": spec.seed},
            "seasonal": _seasonal(s, analysis, acf_block, row, n, seasonal_lags, digits),
            "periodogram": {
                "frequencies": list(frequencies),
                "power": power[row],
                "cumulative": cumulative[row],
                "lower": None if lower is None else list(lower),
                "upper": None if upper is None else list(upper),
                "binned": len(frequencies) < (n - 1) // 2,
            },
            "unit_root": None if unit_root is None else {
                "test": "augmented_dickey_fuller", "statistic": rounding.value(unit_root[0], digits),
                "p_value": rounding.value(unit_root[1], digits), "lags_used": unit_root[2],
            },
            "missing": _missing(s, analysis, row, digits),
            "transform": s.transform,
            "charts": None,
        }
        if charts:
            values = s.values if digits is None else rounding.array(s.values, digits)
            report["charts"] = chart_data(values, s.labels, report, seasonal_flags, s.filled)
        reports.append(report)
    return reports

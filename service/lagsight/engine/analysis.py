"""One pass of the engine over a group of equal-length series that share options.

Every test is computed by one function of a 2-D array, so the same code serves
the observed series and the simulated i.i.d. replicates of the Monte Carlo
p-values. Results are arrays with one row per series.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.special import chdtrc

from lagsight.engine import horizon as ahead
from lagsight.engine import mechanism as mechanism_checks
from lagsight.engine import randomness, seasonality, spectrum, stationarity, stl, whiteness
from lagsight.engine.autocorrelation import autocovariance, center
from lagsight.engine.bands import Band, acf_band, pacf_band
from lagsight.engine.masked import center_observed, masked_acf, masked_portmanteau
from lagsight.engine.partial import pacf
from lagsight.engine.portmanteau import portmanteau

#: Every test the engine knows, in report order.
TEST_NAMES = (
    "ljung_box",
    "box_pierce",
    "seasonal_ljung_box",
    "mcleod_li",
    "runs",
    "turning_points",
    "cumulative_periodogram",
    "jarque_bera",
)
#: Simulated series per chunk of the Monte Carlo null (bounds memory).
MC_CHUNK_VALUES = 4_000_000


@dataclass(frozen=True)
class Spec:
    """What to compute for a group (hashable: equal specs share one engine pass)."""

    max_lag: int
    confidence: float
    model_df: int
    test_lags: tuple[int, ...]  # portmanteau lags
    short_lag: int  # McLeod-Li lag
    period: int | None
    band: str = "white_noise"
    tests: tuple[str, ...] = TEST_NAMES
    p_values: str = "asymptotic"
    replicates: int = 0
    seed: int | None = None
    seasonal_strength: bool = True
    report_extras: bool = True  # suggested period, unit-root check, partial autocorrelations (full report only)
    horizon: int = 1  # the values are h-step forecast errors: lags 1..horizon - 1 are not tested (horizon.py)

    @property
    def seasonal_lags(self) -> tuple[int, ...]:
        if self.period is None:
            return ()
        return tuple(self.period * j for j in range(1, 4) if self.horizon <= self.period * j <= self.max_lag)

    @property
    def layout(self) -> whiteness.Layout:
        """The verdict's evidence layout: with a horizon H the short window is the lags H..short + H - 1."""
        H = self.horizon
        return whiteness.Layout(self.max_lag, min(self.short_lag + H - 1, self.max_lag), self.seasonal_lags, H)


@dataclass
class TestArrays:
    """One test at one or more lags, for every series of a group."""

    name: str
    lags: list  # int lags, or [None] for tests without a lag
    df: list  # int or None per lag (None: not a chi-square test, or no df left)
    statistic: np.ndarray  # (m, L)
    p_value: np.ndarray  # (m, L); NaN where undefined
    extreme: np.ndarray  # (m, L); larger means further from the null (used by Monte Carlo)
    method: str = "asymptotic"
    mc_se: np.ndarray | None = None
    extras: dict = field(default_factory=dict)  # name -> (m,) arrays


@dataclass
class GroupAnalysis:
    """Arrays for m series of length n; row i belongs to the i-th series."""

    n: int
    spec: Spec
    acf: np.ndarray  # (m, K)
    acf_band: Band
    pacf: np.ndarray | None  # (m, K); None without spec.report_extras (the brief answer reads none)
    pacf_band: Band
    tests: list[TestArrays]
    frequencies: np.ndarray  # chart frequencies (p,)
    power: np.ndarray  # (m, p) chart periodogram
    cumulative: np.ndarray  # (m, p)
    expected_cumulative: np.ndarray  # (p,) white-noise line
    ks_critical: float | None
    seasonal_strength: list  # float or None per row
    suggested_period: list  # int or None per row
    unit_root: list  # (stat, p, lags) or None per row
    n_effective: np.ndarray | None = None  # (m, K) per-lag effective sizes when values are missing (masked.py)
    evidence: whiteness.Evidence | None = None  # the verdict's evidence channels (whiteness.py)
    mechanism: mechanism_checks.Mechanism | None = None  # what tells one mechanism from another (mechanism.py)
    seasonal_rows: np.ndarray | None = None  # deferred: the rows whose seasonal strength the caller computes

    @property
    def max_lag(self) -> int:
        return self.spec.max_lag

    @property
    def confidence(self) -> float:
        return self.spec.confidence

    @property
    def model_df(self) -> int:
        return self.spec.model_df


def _per_observed_row(fn, x: np.ndarray, mask: np.ndarray):
    """Apply a row-wise test to the observed values of each row (rows differ in length)."""
    parts = [fn(x[i][mask[i]][None, :]) for i in range(x.shape[0])]
    return tuple(np.concatenate(col) for col in zip(*parts))


def _tests(x: np.ndarray, d: np.ndarray, r: np.ndarray, power: np.ndarray | None, spec: Spec,
           mask: np.ndarray | None = None, n_eff: np.ndarray | None = None,
           cumulative: np.ndarray | None = None) -> list[TestArrays]:
    """Every selected test on rows x (raw), d (centred), r (ACF), power (periodogram) and
    its normalised cumulative sums (computed here when not given).

    With ``mask`` (True where observed) the lag-based tests use the amplitude-modulated
    estimator and its effective sizes ``n_eff``; runs, turning points and Jarque-Bera use
    the observed values in order; the cumulative periodogram needs a complete series.
    """
    m, n = x.shape
    out = []
    H = spec.horizon
    for name in spec.tests:
        if H > 1 and name in ("ljung_box", "box_pierce", "mcleod_li"):
            out.append(_from_horizon(name, d, r, spec, mask, n_eff))
        elif name in ("ljung_box", "box_pierce") and mask is not None:
            stat, df, p = masked_portmanteau(r, n, n_eff, spec.test_lags, spec.model_df, name)
            out.append(TestArrays(name, list(spec.test_lags), [int(v) if v > 0 else None for v in df], stat, p, stat))
        elif name in ("ljung_box", "box_pierce"):
            stat, df, p = portmanteau(r, n, spec.test_lags, spec.model_df, name)
            out.append(TestArrays(name, list(spec.test_lags), [int(v) if v > 0 else None for v in df], stat, p, stat))
        elif name == "seasonal_ljung_box":
            lags = spec.seasonal_lags
            if not lags:
                continue
            idx = np.array(lags) - 1
            weight = n if n_eff is None else n_eff[:, idx]
            stat = (weight * (n + 2.0) * (r[:, idx] ** 2 / (n - np.array(lags)))).sum(axis=1)[:, None]
            if H > 1:  # lags at or beyond the horizon, with Bartlett's variance there
                stat = stat / ahead.bartlett_factor(r, H)[:, None]
            out.append(TestArrays(name, [lags[-1]], [len(lags)], stat, chdtrc(len(lags), stat), stat,
                                  extras={"seasonal_lags": list(lags)}))
        elif name == "mcleod_li" and mask is not None:
            sq = np.where(mask, d * d, np.nan)
            stat = np.full((m, 1), np.nan)
            varies = np.array([np.ptp(sq[i][mask[i]]) > 0 for i in range(m)])
            if varies.any():
                r2, ne2 = masked_acf(sq[varies], mask[varies], spec.short_lag)
                stat[varies], _, _ = masked_portmanteau(r2, n, ne2, [spec.short_lag], 0, "ljung_box")
            p = chdtrc(spec.short_lag, stat)
            out.append(TestArrays(name, [spec.short_lag], [spec.short_lag], stat, p, stat))
        elif name == "mcleod_li":
            stat, p = randomness.mcleod_li(d, [spec.short_lag], scaled=True)
            out.append(TestArrays(name, [spec.short_lag], [spec.short_lag], stat, p, stat))
        elif name == "runs":
            z, p, runs = (randomness.runs_about_median(x) if mask is None
                          else _per_observed_row(randomness.runs_about_median, x, mask))
            out.append(TestArrays(name, [None], [None], z[:, None], p[:, None], np.abs(z)[:, None],
                                  extras={"runs": runs}))
        elif name == "turning_points":
            z, p, count = (randomness.turning_points(x) if mask is None
                           else _per_observed_row(randomness.turning_points, x, mask))
            out.append(TestArrays(name, [None], [None], z[:, None], p[:, None], np.abs(z)[:, None],
                                  extras={"turning_points": count}))
        elif name == "cumulative_periodogram" and power is None:
            nan = np.full((m, 1), np.nan)
            out.append(TestArrays(name, [None], [None], nan, nan, nan, method="exact",
                                  extras={"frequencies_tested": None}))
        elif name == "cumulative_periodogram":
            q = power.shape[1]
            if cumulative is None:
                cumulative = spectrum.cumulative_periodogram(power)
            stat = spectrum.ks_statistic(cumulative)
            out.append(TestArrays(name, [None], [None], stat[:, None], spectrum.ks_p_value(stat, q)[:, None],
                                  stat[:, None], method="exact", extras={"frequencies_tested": q - 1}))
        elif name == "jarque_bera":
            stat, p, skew, kurt = (randomness.jarque_bera(d, scaled=True) if mask is None else _per_observed_row(
                lambda row: randomness.jarque_bera(center(row)), x, mask))  # rescaled exactly: no overflow
            out.append(TestArrays(name, [None], [2], stat[:, None], p[:, None], stat[:, None],
                                  extras={"skewness": skew, "kurtosis": kurt}))
        else:
            raise ValueError(f"unknown test {name!r}")
    return out


def _from_horizon(name: str, d: np.ndarray, r: np.ndarray, spec: Spec, mask: np.ndarray | None,
                  n_eff: np.ndarray | None) -> TestArrays:
    """Ljung-Box, Box-Pierce or McLeod-Li summed from lag ``spec.horizon`` with Bartlett's variance
    (:func:`.horizon.portmanteau_from`); McLeod-Li at the short lag shifted by the horizon, on the squares."""
    m, n = d.shape
    H = spec.horizon
    if name == "mcleod_li":
        lag = min(spec.short_lag + H - 1, spec.max_lag)
        if mask is None:
            sq = center(d * d)
            c = autocovariance(sq, lag)
            with np.errstate(invalid="ignore", divide="ignore"):
                r2, size = c[:, 1:] / c[:, :1], n
        else:
            r2, size = masked_acf(np.where(mask, d * d, np.nan), mask, lag)
        stat, _, p = ahead.portmanteau_from(r2, size, [lag], H)
        return TestArrays(name, [lag], [lag - H + 1], stat, p, stat, extras={"from_lag": H})
    stat, df, p = ahead.portmanteau_from(r, n if n_eff is None else n_eff, spec.test_lags, H, spec.model_df, name)
    return TestArrays(name, list(spec.test_lags), [int(v) if v > 0 else None for v in df], stat, p, stat,
                      extras={"from_lag": H})


def _observe(x: np.ndarray, spec: Spec):
    d = center(x)
    c = autocovariance(d, spec.max_lag)
    r = c[:, 1:] / c[:, :1]
    power = spectrum.periodogram(d)
    return d, r, power


def monte_carlo(observed: list[TestArrays], n: int, spec: Spec) -> None:
    """Replace asymptotic p-values by Monte Carlo ones simulated under an i.i.d. normal null.

    p = (1 + #{simulated >= observed}) / (R + 1), standard error sqrt(p (1 - p) / R).
    Every row of the group shares the same simulated null (same n and options).
    """
    rng = np.random.default_rng(spec.seed)
    R = spec.replicates
    chunk = max(1, MC_CHUNK_VALUES // n)
    sims: dict[str, list[np.ndarray]] = {t.name: [] for t in observed}
    done = 0
    while done < R:
        size = min(chunk, R - done)
        z = rng.standard_normal((size, n))
        d, r, power = _observe(z, spec)
        for t in _tests(z, d, r, power, spec):
            sims[t.name].append(t.extreme)
        done += size
    for t in observed:
        sim = np.sort(np.concatenate(sims[t.name], axis=0), axis=0)  # (R, L)
        counts = np.empty(t.extreme.shape)
        for j in range(t.extreme.shape[1]):
            column = sim[:, j]
            counts[:, j] = R - np.searchsorted(column, t.extreme[:, j], side="left")
        p = (1.0 + counts) / (R + 1.0)
        undefined = np.isnan(t.extreme) | np.isnan(t.p_value)
        t.p_value = np.where(undefined, np.nan, p)
        t.mc_se = np.where(undefined, np.nan, np.sqrt(p * (1.0 - p) / R))
        t.method = "monte_carlo"


def analyse(x: np.ndarray, spec: Spec, mask: np.ndarray | None = None,
            filled: np.ndarray | None = None, deferred: bool = False) -> GroupAnalysis:
    """Autocorrelations, bands, tests and spectral summaries for rows of x.

    Parameters
    ----------
    x : ndarray, shape (m, n)
        Finite, non-constant rows, n >= 3 (NaN allowed only where ``mask`` is False).
    spec : Spec
        max_lag (1 <= max_lag <= n - 1), confidence, model_df, portmanteau lags
        (each <= max_lag), band kind, tests, p-value method and Monte Carlo settings.
    mask : ndarray of bool, shape (m, n), optional
        True where observed. When given, the amplitude-modulated estimator with
        per-lag effective sizes n_k is used (see :mod:`.masked`): band standard
        errors scale by sqrt(n / n_k); the periodogram, STL, the unit-root check
        and Monte Carlo p-values need complete series and are left out.
    filled : ndarray of bool, shape (m, n), optional
        True where a value was filled in (interpolated). The verdict's evidence leaves those values out
        (amplitude-modulated estimator on the observed ones); everything else is computed on the filled series.
    deferred : bool, default False
        Leave the partial autocorrelations (``pacf`` None) and the seasonal strengths (None, with the rows
        that need one in ``seasonal_rows``) to the caller, which computes them for several groups at once
        (:func:`lagsight.engine.family.analyse_groups`).
    """
    x = np.atleast_2d(np.asarray(x, dtype=np.float64))
    m, n = x.shape
    if mask is not None and mask.all():
        mask = None
    n_eff = None
    if mask is None:
        d, r, power = _observe(x, spec)
    else:
        r, n_eff = masked_acf(x, mask, spec.max_lag)
        d, power = center_observed(x, mask), None
    phi = None if deferred or not spec.report_extras else np.clip(pacf(r), -1.0, 1.0)
    band = acf_band(spec.band, r, n, spec.confidence)
    if spec.horizon > 1 and spec.band != "bartlett":  # lags >= h: Bartlett's variance, as the evidence uses
        band.se[:, spec.horizon - 1:] *= np.sqrt(ahead.bartlett_factor(r, spec.horizon))[:, None]
    p_band = pacf_band(spec.band, m, n, spec.max_lag, spec.confidence)
    if n_eff is not None:
        scale = np.sqrt(n / n_eff)
        band.se, p_band.se = band.se * scale, p_band.se * scale
    cumulative = None if power is None else spectrum.cumulative_periodogram(power)
    tests = _tests(x, d, r, power, spec, mask, n_eff, cumulative)
    if spec.p_values == "monte_carlo" and spec.replicates > 0 and mask is None:
        monte_carlo(tests, n, spec)
    if power is None:
        freqs, chart_power, chart_cum, expected, crit = (np.zeros(0), np.zeros((m, 0)), np.zeros((m, 0)),
                                                        np.zeros(0), None)
    else:
        freqs, chart_power, chart_cum, expected = spectrum.chart_blocks(power, n, cumulative=cumulative)
        crit = spectrum.ks_critical(power.shape[1], spec.confidence)
    # STL runs only where a seasonal lag lies outside the band: elsewhere there is no seasonal
    # pattern to measure, and the decomposition (about 1 ms a series) would dominate large batches.
    if spec.seasonal_lags:
        idx = np.array(spec.seasonal_lags) - 1
        seasonal_flag = ((r[:, idx] < band.lower[:, idx]) | (r[:, idx] > band.upper[:, idx])).any(axis=1)
    else:
        seasonal_flag = np.zeros(m, dtype=bool)
    complete = mask is None
    strength: list = [None] * m
    rows = np.zeros(0, dtype=np.int64)
    if (complete and spec.seasonal_strength and spec.period is not None and n >= 2 * spec.period + 1
            and stl.supports(spec.period)):
        rows = np.flatnonzero(seasonal_flag)
        if rows.size and not deferred:
            for i, value in zip(rows.tolist(), seasonality.stl_strengths(x[rows], spec.period).tolist()):
                strength[i] = value
    suggested: list = [None] * m
    if spec.period is None and complete and spec.report_extras:
        suggested = seasonality.suggest_periods(r, band.upper, power, n)
    unit_root: list = [None] * m
    if complete and n >= 10 and spec.report_extras:
        slow = np.flatnonzero(stationarity.decays_slowly(r))
        if slow.size:
            for i, result in zip(slow.tolist(), stationarity.adf_rows(x[slow])):
                unit_root[i] = result
    decision_mask = mask if filled is None else (~filled if mask is None else mask & ~filled)
    ev = whiteness.evidence(x, spec.layout, spec.model_df, mask=decision_mask)
    alpha = 1.0 - spec.confidence
    candidates = ev.p_autocorrelation < alpha
    if mask is None:
        persistent = np.flatnonzero(candidates & (r[:, 0] >= 0.3))
        mech = mechanism_checks.check(x, r, persistent, np.arange(m))
    else:
        nan = np.full(m, np.nan)
        mech = mechanism_checks.Mechanism(nan, nan, nan, nan, nan, np.zeros(m, dtype=bool), [[] for _ in range(m)],
                                          [[] for _ in range(m)])
    return GroupAnalysis(
        n, spec, r, band, phi, p_band, tests, freqs, chart_power, chart_cum, expected, crit,
        strength, suggested, unit_root, n_eff, ev, mech, rows if deferred else None,
    )

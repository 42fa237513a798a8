"""The consultation-depth statistics against named references (statsmodels, scipy, published formulas)."""
from __future__ import annotations

import numpy as np
import pytest
from scipy import stats
from scipy.signal import lfilter
from statsmodels import datasets as smd
from statsmodels.sandbox.stats.runs import runstest_1samp
from statsmodels.stats.diagnostic import acorr_ljungbox
from statsmodels.stats.stattools import jarque_bera as sm_jarque_bera
from statsmodels.tsa.stattools import acf as sm_acf

from lagsight.engine import randomness, spectrum
from lagsight.engine.autocorrelation import acf, center
from lagsight.engine.bands import acf_band, null_mean, null_variance, per_lag_confidence
from lagsight.engine.seasonality import stl_strength

SUNSPOTS = smd.sunspots.load_pandas().data["SUNACTIVITY"].to_numpy()  # shipped with statsmodels
NILE = smd.nile.load_pandas().data["volume"].to_numpy()
INFL = smd.macrodata.load_pandas().data["infl"].to_numpy()
SERIES = {"sunspots": SUNSPOTS, "nile": NILE, "macrodata_infl": INFL}


@pytest.mark.parametrize("name", sorted(SERIES))
def test_bartlett_band_matches_statsmodels(name):
    # Reference: statsmodels.tsa.stattools.acf(x, nlags=K, alpha=0.05, bartlett_confint=True): the
    # confidence interval around r_k has half-width z * sqrt((1 + 2 sum_{j<k} r_j^2) / n)
    # (result_object=False keeps its tuple return).
    x = SERIES[name]
    K = 30
    r, confint = sm_acf(x, nlags=K, alpha=0.05, bartlett_confint=True, fft=False, result_object=False)
    half = (confint[1:, 1] - confint[1:, 0]) / 2
    band = acf_band("bartlett", acf(x[None], K), x.size, 0.95)
    np.testing.assert_allclose(band.upper[0], half, rtol=1e-10)


@pytest.mark.parametrize("name", sorted(SERIES))
def test_mcleod_li_matches_ljung_box_on_squares(name):
    # Reference: McLeod and Li (1983) = Ljung-Box on the squared centred series;
    # statsmodels.stats.diagnostic.acorr_ljungbox((x - x.mean())**2, lags=[h]).
    x = SERIES[name]
    for h in (5, 10):
        ref = acorr_ljungbox((x - x.mean()) ** 2, lags=[h], return_df=True)
        stat, p = randomness.mcleod_li(center(x[None]), [h])
        assert stat[0, 0] == pytest.approx(ref["lb_stat"].iloc[0], rel=1e-10)
        assert p[0, 0] == pytest.approx(ref["lb_pvalue"].iloc[0], rel=1e-9, abs=1e-300)


@pytest.mark.parametrize("name", sorted(SERIES))
def test_runs_test_matches_statsmodels(name):
    # Reference: statsmodels.sandbox.stats.runs.runstest_1samp(x, cutoff="median", correction=False)
    # (values at the median count as above, as here).
    x = SERIES[name]
    z_ref, p_ref = runstest_1samp(x, cutoff="median", correction=False)
    z, p, _ = randomness.runs_about_median(x[None])
    assert z[0] == pytest.approx(z_ref, rel=1e-12)
    assert p[0] == pytest.approx(p_ref, rel=1e-9, abs=1e-300)


def test_turning_points_worked_example():
    # Worked by hand: 1 3 2 4 5 2 6 has turning points at 3 (peak), 2 (trough), 5 (peak), 2 (trough): T = 4.
    # E[T] = 2(n-2)/3 = 10/3, Var[T] = (16n - 29)/90 = 83/90 (Brockwell and Davis 2016, section 1.6).
    z, p, count = randomness.turning_points(np.array([[1.0, 3, 2, 4, 5, 2, 6]]))
    assert count[0] == 4
    assert z[0] == pytest.approx((4 - 10 / 3) / np.sqrt(83 / 90), rel=1e-14)
    assert p[0] == pytest.approx(2 * stats.norm.sf(abs(z[0])), rel=1e-12)


@pytest.mark.parametrize("name", sorted(SERIES))
def test_turning_points_match_a_direct_count(name):
    x = SERIES[name]
    direct = sum(1 for t in range(1, x.size - 1)
                 if (x[t] > x[t - 1] and x[t] > x[t + 1]) or (x[t] < x[t - 1] and x[t] < x[t + 1]))
    assert randomness.turning_points(x[None])[2][0] == direct


@pytest.mark.parametrize("name", sorted(SERIES))
def test_jarque_bera_matches_scipy_and_statsmodels(name):
    # References: scipy.stats.jarque_bera(x); statsmodels.stats.stattools.jarque_bera(x) (skew, kurtosis).
    x = SERIES[name]
    stat, p, skew, kurt = randomness.jarque_bera(center(x[None]))
    ref = stats.jarque_bera(x)
    assert stat[0] == pytest.approx(ref.statistic, rel=1e-10)
    assert p[0] == pytest.approx(ref.pvalue, rel=1e-9, abs=1e-300)
    _, _, sm_skew, sm_kurt = sm_jarque_bera(x)
    assert skew[0] == pytest.approx(sm_skew, rel=1e-10) and kurt[0] == pytest.approx(sm_kurt, rel=1e-10)


@pytest.mark.parametrize("name", sorted(SERIES))
def test_periodogram_is_the_dft_formula(name):
    # Published definition: I(f_j) = |sum_t d_t exp(-2 pi i j t / n)|^2 / n at j = 1..floor((n-1)/2).
    x = SERIES[name]
    d = x - x.mean()
    n = x.size
    t = np.arange(n)
    j = np.arange(1, (n - 1) // 2 + 1)
    direct = np.abs(np.exp(-2j * np.pi * np.outer(j, t) / n) @ d) ** 2 / n
    scale = 2.0 ** -np.frexp(np.abs(x).max())[1]  # the engine works on exactly rescaled values
    np.testing.assert_allclose(spectrum.periodogram(center(x[None]))[0] / scale**2, direct, rtol=1e-9)


@pytest.mark.parametrize("name", sorted(SERIES))
def test_cumulative_periodogram_test_is_scipy_kstest_of_the_cumulative_sums(name):
    # Reference: Bartlett's test = one-sample Kolmogorov-Smirnov test of C_1..C_{q-1} against U(0, 1)
    # (Durbin 1969); scipy.stats.kstest(C, "uniform", method="exact").
    x = SERIES[name]
    power = spectrum.periodogram(center(x[None]))
    q = power.shape[1]
    c = spectrum.cumulative_periodogram(power)[0, :-1]
    ref = stats.kstest(c, "uniform", method="exact")
    d = spectrum.ks_statistic(spectrum.cumulative_periodogram(power))
    assert d[0] == pytest.approx(ref.statistic, rel=1e-12)
    # Tabulated exact distribution for 16 < q - 1 <= 1000: relative error about 1e-5.
    assert spectrum.ks_p_value(d, q)[0] == pytest.approx(ref.pvalue, rel=1e-4, abs=1e-12)


@pytest.mark.parametrize("m", [5, 16, 17, 58, 300, 1000])
def test_ks_p_values_follow_scipy_kstwo(m):
    # Reference: scipy.stats.kstwo.sf (exact). Exact up to 16 points, tabulated up to 1000.
    d = np.linspace(0.5 / m, min(1.0, 3.0 / np.sqrt(m)), 97)
    np.testing.assert_allclose(spectrum.ks_p_value(d, m + 1), stats.kstwo.sf(d, m), rtol=1e-4, atol=1e-12)


@pytest.mark.parametrize("m", [17, 18, 101, 444, 999, 1000])
def test_shipped_ks_table_holds_scipy_kstwo_values(m):
    # Reference: scipy.stats.kstwo.sf (exact), recomputed here on the table's grid; the shipped
    # file stores log P(D_m > d) as float32 (python -m lagsight.engine.ks_table rebuilds it).
    from lagsight.engine import ks_table

    np.testing.assert_allclose(ks_table.log_sf(m), ks_table.exact_log_sf(m), rtol=1e-6, atol=1e-6)


@pytest.mark.parametrize("m", [5, 16, 17, 58, 300, 1000])
@pytest.mark.parametrize("confidence", [0.8, 0.95, 0.99, 0.999])
def test_ks_critical_values_follow_scipy_kstwo(m, confidence):
    # Reference: scipy.stats.kstwo.isf (exact); a root search on the tabulated function for 16 < m <= 1000.
    assert spectrum.ks_critical(m + 1, confidence) == pytest.approx(stats.kstwo.isf(1 - confidence, m), rel=2e-5)


def test_ks_p_values_beyond_the_table_use_stephens_within_half_a_percent():
    # Reference: scipy.stats.kstwo.sf (exact, slow at this size); Stephens (1970) approximation beyond 1000 points.
    m = 2000
    d = np.array([0.015, 0.02, 0.025, 0.03, 0.035])
    np.testing.assert_allclose(spectrum.ks_p_value(d, m + 1), stats.kstwo.sf(d, m), atol=5e-3)


def test_small_sample_band_moments_by_simulation():
    """Exact null mean -(n-k)/(n(n-1)) and variance (Moran 1948; Dufour and Roy 1985, formula recalled
    from memory) checked by simulation: 200,000 seeded i.i.d. normal series of length 10 and 30."""
    rng = np.random.default_rng(1948)
    for n in (10, 30):
        r = acf(rng.standard_normal((200_000, n)), n - 1)
        k = np.arange(1, n)
        np.testing.assert_allclose(r.mean(axis=0), null_mean(n, n - 1), atol=0.0015)
        exact = k <= n / 2
        ratio = r.var(axis=0) / null_variance(n, n - 1)
        assert np.all(np.abs(ratio[exact] - 1) < 0.01)  # the closed form holds for k <= n/2
        assert np.all(np.abs(ratio[~exact] - 1) < 0.12)  # the (n-k)/(n(n+2)) approximation beyond


def test_simultaneous_band_is_sidak():
    # Sidak: per-lag coverage confidence^(1/K) (scipy.stats.norm for the quantile). It is a little
    # narrower than Bonferroni's z for alpha/(2K) (3.0233 for K = 20 at 95%).
    assert per_lag_confidence("simultaneous", 0.95, 20) == pytest.approx(0.95 ** (1 / 20))
    band = acf_band("simultaneous", np.zeros((1, 20)), 100, 0.95)
    assert band.z == pytest.approx(stats.norm.isf((1 - 0.95 ** (1 / 20)) / 2), rel=1e-12)
    bonferroni = stats.norm.isf(0.05 / 40)
    assert bonferroni - 0.02 < band.z < bonferroni


def test_seasonal_strength_formula_on_stl():
    # Seasonal strength max(0, 1 - Var(R)/Var(S + R)) (Wang, Smith et al. 2006) on
    # statsmodels.tsa.seasonal.STL(x, period=12) of the monthly CO2 data shipped with statsmodels.
    from statsmodels.tsa.seasonal import STL

    co2 = smd.co2.load_pandas().data["co2"].resample("MS").mean().interpolate().to_numpy()
    fit = STL(co2, period=12).fit()
    expected = max(0.0, 1 - np.var(fit.resid) / np.var(fit.seasonal + fit.resid))
    assert stl_strength(co2, 12) == pytest.approx(expected, abs=5e-7)  # reported to 6 decimals
    assert stl_strength(co2, 12) > 0.9  # CO2 has a strong annual cycle


def test_unit_root_check_is_statsmodels_adfuller_with_schwert_lags():
    # Reference: statsmodels.tsa.stattools.adfuller(x, maxlag=floor(12 (n/100)^(1/4)), autolag=None)
    # on the Nile series shipped with statsmodels (n = 100: 12 lags).
    import warnings

    from statsmodels.tsa.stattools import adfuller

    from lagsight.engine.stationarity import adf

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)  # its tuple-return notice
        ref = adfuller(NILE, maxlag=12, autolag=None)
    stat, p, used = adf(NILE)
    assert used == 12
    assert stat == pytest.approx(ref[0], rel=1e-12) and p == pytest.approx(ref[1], rel=1e-10)


def test_batched_stl_operator_equals_statsmodels_fits():
    # Reference: statsmodels.tsa.seasonal.STL(x, period=12).fit() per series; the engine applies the
    # (linear, non-robust) STL as one matrix product when at least n series of length n need it.
    from statsmodels.tsa.seasonal import STL

    from lagsight.engine import seasonality

    rng = np.random.default_rng(31)
    n, period = 48, 12
    t = np.arange(n)
    x = np.sin(2 * np.pi * t / period) + rng.standard_normal((60, n))  # 60 >= n rows: the operator path
    seasonal_op, remainder_op = seasonality._stl_operator(n, period)
    for row in x[:5]:
        fit = STL(row, period=period).fit()
        np.testing.assert_allclose(row @ seasonal_op, fit.seasonal, atol=1e-12)
        np.testing.assert_allclose(row @ remainder_op, fit.resid, atol=1e-12)
    batched = seasonality.stl_strengths(x, period)
    one_by_one = np.array([seasonality.stl_strengths(row[None], period)[0] for row in x])
    np.testing.assert_array_equal(batched, one_by_one)


def test_mackinnon_p_values_match_statsmodels():
    # Reference: statsmodels.tsa.adfvalues.mackinnonp(t, regression="c", N=1) (MacKinnon 1994).
    from statsmodels.tsa.adfvalues import mackinnonp

    from lagsight.engine.stationarity import mackinnon_p

    grid = np.concatenate([np.linspace(-25, 5, 3001), [-18.83, -1.61, 2.74]])
    ours = mackinnon_p(grid)
    ref = np.array([mackinnonp(t, regression="c", N=1) for t in grid])
    np.testing.assert_allclose(ours, ref, rtol=1e-13, atol=0)


def test_batched_unit_root_check_matches_adfuller_row_by_row():
    # Reference: statsmodels.tsa.stattools.adfuller(x, maxlag=Schwert's lags, autolag=None) per series,
    # on simulated random walks and AR(1) paths (seeded nulls), one with constant differences (rank-deficient
    # design, handed to adfuller itself) and one of rounded values.
    import warnings

    from statsmodels.tsa.stattools import adfuller

    from lagsight.engine import stationarity

    rng = np.random.default_rng(8)
    for n in (10, 31, 120, 700):
        x = np.cumsum(rng.standard_normal((12, n)), axis=1)
        x[3] = 2.0 * np.arange(n) + 1.0
        x[4] = np.round(x[4])
        x[5:8] = lfilter([1.0], [1.0, -0.9], rng.standard_normal((3, n)), axis=1)
        for row, (stat, p, used) in zip(x, stationarity.adf_rows(x)):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                ref = adfuller(row, maxlag=stationarity._schwert_lags(n), autolag=None)
            assert used == ref[2]
            assert stat == pytest.approx(ref[0], rel=1e-11, abs=1e-12) and p == pytest.approx(ref[1], rel=1e-10, abs=1e-14)

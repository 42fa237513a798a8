"""The engine against outside references: NIST StRD certified values and statsmodels."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy.stats import chi2
from statsmodels import datasets as smd
from statsmodels.stats.diagnostic import acorr_ljungbox
from statsmodels.tsa.stattools import acf as sm_acf
from statsmodels.tsa.stattools import pacf as sm_pacf

from lagsight.engine import acf, pacf, portmanteau
from lagsight.engine.bands import normal_quantile

from .conftest import DATA, nist_datasets

NIST = nist_datasets()


def test_nist_copy_matches_shared_reference():
    """tests/data holds an unchanged copy of the shared NIST StRD file (when the shared folder is present)."""
    shared = Path(__file__).resolve().parents[2] / "shared" / "reference" / "nist_strd_univariate.json"
    if not shared.exists():
        pytest.skip("../shared/reference is not beside this checkout")
    assert shared.read_bytes() == (DATA / "nist_strd_univariate.json").read_bytes()


@pytest.mark.parametrize("method", ["direct", "fft", "auto"])
@pytest.mark.parametrize("name", sorted(NIST))
def test_lag1_autocorrelation_matches_nist_certified(name, method):
    # Source: NIST StRD Univariate Summary Statistics, certified lag-1 autocorrelation.
    # Tolerance from the issue: 1e-12 relative, 2e-11 on NumAcc4 (its decimal inputs rounded to
    # float64 alone move the exact r(1) by 9.3e-12 relative).
    values, certified = NIST[name]
    r1 = acf(values[None, :], 1, method)[0, 0]
    tol = 2e-11 if name == "NumAcc4" else 1e-12
    assert abs(r1 - certified) / abs(certified) <= tol


def test_nist_sets_in_one_batch_match_one_by_one():
    """Stacking series of equal length changes nothing (NumAcc2-4 share n = 1001)."""
    block = np.stack([NIST[k][0] for k in ("NumAcc2", "NumAcc3", "NumAcc4")])
    together = acf(block, 5)
    for row, k in enumerate(("NumAcc2", "NumAcc3", "NumAcc4")):
        np.testing.assert_array_equal(together[row], acf(NIST[k][0][None, :], 5)[0])


def _statsmodels_series():
    """Datasets shipped inside statsmodels (statsmodels.datasets), no download."""
    co2 = smd.co2.load_pandas().data["co2"].dropna().to_numpy()
    return {
        "sunspots": smd.sunspots.load_pandas().data["SUNACTIVITY"].to_numpy(),
        "nile": smd.nile.load_pandas().data["volume"].to_numpy(),
        "macrodata_infl": smd.macrodata.load_pandas().data["infl"].to_numpy(),
        "co2_weekly": co2,
        "elnino": smd.elnino.load_pandas().data.iloc[:, 1:].to_numpy().ravel(),
    }


SM_SERIES = _statsmodels_series()


@pytest.mark.parametrize("method", ["direct", "fft"])
@pytest.mark.parametrize("name", sorted(SM_SERIES))
def test_acf_matches_statsmodels(name, method):
    # Reference: statsmodels.tsa.stattools.acf(x, nlags=K, adjusted=False, fft=False), agreement 1e-10.
    x = SM_SERIES[name]
    K = min(60, x.size - 1)
    ref = sm_acf(x, nlags=K, adjusted=False, fft=False)[1:]
    np.testing.assert_allclose(acf(x[None, :], K, method)[0], ref, rtol=0, atol=1e-10)


@pytest.mark.parametrize("name", sorted(SM_SERIES))
def test_pacf_matches_statsmodels_levinson_durbin(name):
    # Reference: statsmodels.tsa.stattools.pacf(x, nlags=K, method="ldb") (Levinson-Durbin on the
    # biased autocovariance), agreement 1e-10.
    x = SM_SERIES[name]
    K = min(40, x.size // 2 - 1)
    ref = sm_pacf(x, nlags=K, method="ldb")[1:]
    np.testing.assert_allclose(pacf(acf(x[None, :], K))[0], ref, rtol=0, atol=1e-10)


@pytest.mark.parametrize("model_df", [0, 2])
@pytest.mark.parametrize("name", sorted(SM_SERIES))
def test_portmanteau_matches_statsmodels(name, model_df):
    # Reference: statsmodels.stats.diagnostic.acorr_ljungbox(x, lags=[...], boxpierce=True,
    # model_df=model_df, return_df=True): lb_stat, lb_pvalue, bp_stat, bp_pvalue; agreement 1e-10
    # (p-values relative, since many are tiny).
    x = SM_SERIES[name]
    lags = [5, 10, 24]
    ref = acorr_ljungbox(x, lags=lags, boxpierce=True, model_df=model_df, return_df=True)
    r = acf(x[None, :], max(lags))
    for kind, stat_col, p_col in (("ljung_box", "lb_stat", "lb_pvalue"), ("box_pierce", "bp_stat", "bp_pvalue")):
        stat, df, p = portmanteau(r, x.size, lags, model_df, kind)
        np.testing.assert_allclose(stat[0], ref[stat_col].to_numpy(), rtol=1e-10)
        np.testing.assert_allclose(p[0], ref[p_col].to_numpy(), rtol=1e-10, atol=1e-300)
        np.testing.assert_array_equal(df, np.array(lags) - model_df)


def test_portmanteau_lag_without_degrees_of_freedom_is_nan_in_engine():
    x = SM_SERIES["nile"]
    stat, df, p = portmanteau(acf(x[None, :], 3), x.size, [1, 2, 3], model_df=2)
    assert list(df) == [-1, 0, 1]
    assert np.isnan(p[0, :2]).all() and np.isfinite(p[0, 2]) and np.isfinite(stat).all()


# Upper-tail chi-square critical values, recalled from memory of the standard printed table
# (as in statistics textbook appendices); three decimals as printed.
CHI2_TABLE = [
    (0.05, 1, 3.841), (0.05, 2, 5.991), (0.05, 5, 11.070), (0.05, 10, 18.307),
    (0.05, 20, 31.410), (0.05, 24, 36.415), (0.05, 30, 43.773),
    (0.01, 1, 6.635), (0.01, 10, 23.209), (0.01, 20, 37.566), (0.10, 10, 15.987),
]


@pytest.mark.parametrize("alpha,df,critical", CHI2_TABLE)
def test_chi_square_critical_values_match_table(alpha, df, critical):
    # The p-value at the tabled critical value is alpha, to the table's three decimals.
    assert chi2.isf(alpha, df) == pytest.approx(critical, abs=5e-4)
    r = np.full((1, df), np.sqrt(critical / (100 * df)))  # Box-Pierce Q = 100 * sum r^2 = critical
    _, _, p = portmanteau(r, 100, [df], kind="box_pierce")
    assert p[0, 0] == pytest.approx(alpha, rel=2e-3)


def test_normal_quantile_is_1_96_at_95_percent():
    # 1.959964 is the two-sided 95% normal quantile of every normal table (recalled from memory).
    assert normal_quantile(0.95) == pytest.approx(1.959964, abs=1e-6)


def _stl_reference_series() -> dict[str, tuple[np.ndarray, int]]:
    """Seasonal series from statsmodels.datasets, with their periods."""
    macro = smd.macrodata.load_pandas().data
    elnino = smd.elnino.load_pandas().data.iloc[:, 1:].to_numpy(dtype=float).ravel()
    co2 = smd.co2.load_pandas().data["co2"].interpolate().bfill().to_numpy(dtype=float)
    return {
        "realgdp_quarterly": (macro["realgdp"].to_numpy(dtype=float), 4),
        "elnino_monthly": (elnino, 12),
        "co2_weekly_yearly": (co2[:1500], 52),
        "sunspots_11": (smd.sunspots.load_pandas().data["SUNACTIVITY"].to_numpy(dtype=float), 11),
    }


@pytest.mark.parametrize("name", sorted(_stl_reference_series()))
def test_stl_decomposition_matches_statsmodels(name):
    # Reference: statsmodels.tsa.seasonal.STL(x, period=p).fit() with its default settings, on
    # statsmodels datasets; the vectorised decomposition agrees to rounding.
    from statsmodels.tsa.seasonal import STL

    from lagsight.engine import stl

    x, period = _stl_reference_series()[name]
    fit = STL(x, period=period).fit()
    seasonal, trend = stl.decompose(x[None, :], period)
    scale = np.abs(x).max()
    np.testing.assert_allclose(seasonal[0], fit.seasonal, rtol=0, atol=1e-11 * scale)
    np.testing.assert_allclose(trend[0], fit.trend, rtol=0, atol=1e-11 * scale)


@pytest.mark.parametrize("n, period", [(5, 2), (9, 4), (15, 7), (25, 12), (26, 12), (37, 12), (121, 12),
                                       (105, 52), (400, 52), (731, 365)])
def test_stl_edge_shapes_match_statsmodels_row_by_row(n, period):
    # Reference: statsmodels' STL on each row; shapes with the shortest cycle-subseries (two or three
    # values), subseries of two lengths, windows longer than the series. Rows are seeded noise plus a
    # cycle and a drift; a row's result does not depend on the other rows.
    from statsmodels.tsa.seasonal import STL

    from lagsight.engine import stl

    rng = np.random.default_rng(n * 1000 + period)
    t = np.arange(n)
    x = 10 + np.sin(2 * np.pi * t / period) + 0.01 * t + 0.5 * rng.standard_normal((4, n))
    seasonal, trend = stl.decompose(x, period)
    for i in range(4):
        fit = STL(x[i], period=period).fit()
        np.testing.assert_allclose(seasonal[i], fit.seasonal, rtol=0, atol=1e-11)
        np.testing.assert_allclose(trend[i], fit.trend, rtol=0, atol=1e-11)
        alone = stl.decompose(x[i:i + 1], period)
        assert np.array_equal(alone[0][0], seasonal[i]) and np.array_equal(alone[1][0], trend[i])


def test_stl_at_the_longest_supported_window_matches_statsmodels():
    # Reference: statsmodels' STL at period 1,048, whose trend window (2,001) is the longest decomposed;
    # the coefficient tables are computed in blocks of rows there.
    from statsmodels.tsa.seasonal import STL

    from lagsight.engine import stl

    period = 1048
    assert stl.supports(period) and not stl.supports(period + 1)
    n = 2 * period + 40
    x = 5 + np.sin(2 * np.pi * np.arange(n) / period) + 0.3 * np.random.default_rng(9).standard_normal(n)
    fit = STL(x, period=period).fit()
    seasonal, trend = stl.decompose(x[None, :], period)
    np.testing.assert_allclose(seasonal[0], fit.seasonal, rtol=0, atol=1e-11)
    np.testing.assert_allclose(trend[0], fit.trend, rtol=0, atol=1e-11)

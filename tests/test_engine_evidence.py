"""The trend and unit-root checks (engine.trend) against outside references."""
from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.signal import lfilter
from statsmodels import datasets as smd
from statsmodels.tsa.adfvalues import mackinnonp
from statsmodels.tsa.stattools import acf as sm_acf
from statsmodels.tsa.stattools import adfuller, kpss

from lagsight.engine import trend
from lagsight.engine.trend import adf_trend_rows, kpss_rows, mackinnon_p_ct, trend_slope

# Series shipped inside statsmodels (statsmodels.datasets), no download.
DATASETS = {
    "realgdp": smd.macrodata.load_pandas().data["realgdp"].to_numpy(),
    "infl": smd.macrodata.load_pandas().data["infl"].to_numpy(),
    "sunspots": smd.sunspots.load_pandas().data["SUNACTIVITY"].to_numpy(),
    "nile": smd.nile.load_pandas().data["volume"].to_numpy(),
}


def seeded_rows(n: int, seed: int) -> np.ndarray:
    """Seeded simulated rows: i.i.d. normal, random walks, AR(1) 0.9, trend plus noise, a rounded walk."""
    rng = np.random.default_rng(seed)
    e = rng.standard_normal((8, n))
    x = e.copy()
    x[2:4] = np.cumsum(e[2:4], axis=1)
    x[4:6] = lfilter([1.0], [1.0, -0.9], e[4:6], axis=1)
    x[6] = 0.05 * np.arange(n) + e[6]
    x[7] = np.round(np.cumsum(e[7]))
    return x


def garch(m: int, n: int, seed: int, omega=0.1, alpha=0.2, beta=0.7) -> np.ndarray:
    """Seeded GARCH(1,1) rows (finite fourth moment: 3 alpha^2 + 2 alpha beta + beta^2 = 0.89 < 1)."""
    rng = np.random.default_rng(seed)
    z = rng.standard_normal((m, n + 200))
    out = np.empty_like(z)
    h = np.full(m, omega / (1 - alpha - beta))
    e = np.zeros(m)
    for t in range(z.shape[1]):
        h = omega + alpha * e * e + beta * h
        e = np.sqrt(h) * z[:, t]
        out[:, t] = e
    return out[:, 200:]


def quiet(f, *args, **kwargs):
    """Call a statsmodels reference with its notices silenced (short-series and table-end warnings)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return f(*args, **kwargs)


# ---- adf_trend_rows --------------------------------------------------------------------------------

def test_mackinnon_ct_p_values_match_statsmodels():
    # Reference: statsmodels.tsa.adfvalues.mackinnonp(t, regression="ct", N=1) (MacKinnon 1994).
    grid = np.concatenate([np.linspace(-20, 3, 2301), [-16.18, -2.89, 0.7]])
    ref = np.array([mackinnonp(t, regression="ct", N=1) for t in grid])
    np.testing.assert_allclose(mackinnon_p_ct(grid), ref, rtol=1e-13, atol=0)


@pytest.mark.parametrize("name", sorted(DATASETS))
def test_adf_trend_matches_adfuller_ct_on_datasets(name):
    x = DATASETS[name]
    got = adf_trend_rows(x[None])
    lags = int(got.lags[0])
    assert lags == min(int(12 * (x.size / 100) ** 0.25), x.size // 2 - 3)
    # Reference: statsmodels.tsa.stattools.adfuller(x, maxlag=lags, autolag=None, regression="ct")
    stat, p, used, *_ = quiet(adfuller, x, maxlag=lags, autolag=None, regression="ct", result_object=False)
    assert used == lags
    assert got.statistic[0] == pytest.approx(stat, rel=1e-12)
    assert got.p_value[0] == pytest.approx(p, rel=1e-12, abs=1e-15)


@pytest.mark.parametrize("n", [10, 33, 250])
def test_adf_trend_matches_adfuller_ct_on_seeded_rows(n):
    x = seeded_rows(n, n)
    x[1] = 3.0 * np.arange(n) - 2.0  # an exact line: rank-deficient design, handed to adfuller
    got = adf_trend_rows(x)
    for i, row in enumerate(x):
        # Reference: statsmodels.tsa.stattools.adfuller(row, maxlag=lags, autolag=None, regression="ct")
        stat, p, used, *_ = quiet(adfuller, row, maxlag=int(got.lags[i]), autolag=None, regression="ct",
                                  result_object=False)
        assert got.statistic[i] == pytest.approx(stat, rel=1e-12, abs=1e-12)
        assert got.p_value[i] == pytest.approx(p, rel=1e-12, abs=1e-14)


def test_adf_trend_chunks_give_the_same_result(monkeypatch):
    x = seeded_rows(60, 11)
    whole = adf_trend_rows(x)
    monkeypatch.setattr(trend, "CHUNK_VALUES", 1)  # one row per chunk
    np.testing.assert_array_equal(adf_trend_rows(x).statistic, whole.statistic)


# ---- kpss_rows -------------------------------------------------------------------------------------

@pytest.mark.parametrize("nlags", ["legacy", "auto"])
@pytest.mark.parametrize("regression", ["c", "ct"])
def test_kpss_matches_statsmodels(regression, nlags):
    rows = [DATASETS[k][None] for k in sorted(DATASETS)] + list(seeded_rows(150, 12)[:, None, :])
    rows.append(np.random.default_rng(13).standard_normal((1, 6)))  # short: the legacy lag 6 is capped at n - 1
    for x in rows:
        with warnings.catch_warnings():
            warnings.simplefilter("error")  # the function itself must not warn, even at the table ends
            got = kpss_rows(x, regression, nlags)
        # Reference: statsmodels.tsa.stattools.kpss(x, regression=..., nlags=...) (InterpolationWarning caught)
        stat, p, lags, _ = quiet(kpss, x[0], regression=regression, nlags=nlags, result_object=False)
        assert got.lags[0] == lags
        assert got.statistic[0] == pytest.approx(stat, rel=1e-12)
        assert got.p_value[0] == pytest.approx(p, rel=1e-12)
        assert got.clipped[0] == (p in (0.01, 0.10))


def test_kpss_batches_rows_with_their_own_auto_lags():
    x = seeded_rows(200, 14)
    got = kpss_rows(x, "c", "auto")
    assert len(set(got.lags.tolist())) > 2  # different lags in one batch
    for i, row in enumerate(x):
        # Reference: statsmodels.tsa.stattools.kpss(row, regression="c", nlags="auto")
        stat, _, lags, _ = quiet(kpss, row, regression="c", nlags="auto", result_object=False)
        assert got.lags[i] == lags and got.statistic[i] == pytest.approx(stat, rel=1e-12)


def test_kpss_p_values_are_clipped_to_the_table():
    rng = np.random.default_rng(15)
    x = np.vstack([0.05 * np.arange(400) + rng.standard_normal(400), rng.standard_normal(400)])
    got = kpss_rows(x, "c")
    # Source: the table in statsmodels.tsa.stattools.kpss (KPSS 1992, Table 1), p from 0.01 to 0.10
    assert got.p_value.tolist() == [0.01, 0.10] and got.clipped.tolist() == [True, True]


# ---- trend_slope -----------------------------------------------------------------------------------

@pytest.mark.parametrize("name", sorted(DATASETS))
def test_trend_slope_matches_statsmodels_ols_hac(name):
    x = DATASETS[name]
    n = x.size
    got = trend_slope(x[None])
    # Source: statsmodels.stats.sandwich_covariance.S_hac_simple's default lag floor(4 (n/100)^(2/9))
    assert got.lags == int(np.floor(4 * (n / 100) ** (2 / 9)))
    design = sm.add_constant(np.arange(1.0, n + 1))
    # Reference: statsmodels OLS(x, [1, t]).fit(cov_type="HAC", cov_kwds={"maxlags": L}) whose default is
    # use_correction=False (Bartlett kernel); the explicit False gives the same numbers.
    for kwds in ({"maxlags": got.lags}, {"maxlags": got.lags, "use_correction": False}):
        fit = sm.OLS(x, design).fit(cov_type="HAC", cov_kwds=kwds)
        assert got.slope[0] == pytest.approx(fit.params[1], rel=1e-12)
        assert got.se[0] == pytest.approx(fit.bse[1], rel=1e-12)
        assert got.t[0] == pytest.approx(fit.tvalues[1], rel=1e-12)
        assert got.p_value[0] == pytest.approx(fit.pvalues[1], rel=1e-8, abs=1e-300)  # normal p (use_t False)
    corrected = sm.OLS(x, design).fit(cov_type="HAC", cov_kwds={"maxlags": got.lags, "use_correction": True})
    assert corrected.bse[1] == pytest.approx(got.se[0] * np.sqrt(n / (n - 2)), rel=1e-10)  # n/(n-k) factor
    # Reference: statsmodels.tsa.stattools.acf of the OLS residuals, lag 1
    assert got.resid_r1[0] == pytest.approx(sm_acf(fit.resid, nlags=1, fft=False)[1], abs=1e-12)


def test_trend_slope_on_seeded_rows_and_given_lags():
    x = seeded_rows(90, 17)
    got = trend_slope(x, lags=6)
    design = sm.add_constant(np.arange(1.0, 91))
    for i, row in enumerate(x):
        # Reference: statsmodels OLS(...).fit(cov_type="HAC", cov_kwds={"maxlags": 6, "use_correction": False})
        fit = sm.OLS(row, design).fit(cov_type="HAC", cov_kwds={"maxlags": 6, "use_correction": False})
        assert got.slope[i] == pytest.approx(fit.params[1], rel=1e-12, abs=1e-15)
        assert got.se[i] == pytest.approx(fit.bse[1], rel=1e-12)

"""The evidence checks (engine.evidence, engine.trend) against outside references."""
from __future__ import annotations

import itertools
import warnings
from fractions import Fraction

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.signal import lfilter
from scipy.stats import chi2, median_abs_deviation, norm, rankdata
from statsmodels import datasets as smd
from statsmodels.stats.diagnostic import het_arch
from statsmodels.tsa.adfvalues import mackinnonp
from statsmodels.tsa.stattools import acf as sm_acf
from statsmodels.tsa.stattools import adfuller, kpss

from lagsight.engine import evidence, trend
from lagsight.engine.bands import null_mean
from lagsight.engine.evidence import (
    arch_lm_rows,
    average_ranks,
    outlier_flags,
    outlier_threshold,
    rank_acf,
    robust_acf_variance,
    robust_portmanteau,
)
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


# ---- robust_acf_variance, robust_portmanteau -----------------------------------------------------

def tau_loop(row: np.ndarray, max_lag: int) -> np.ndarray:
    # Source: the published formula (Diebold 1986; Lobato, Nankervis and Savin 2001, JASA 96, 1066-1076):
    # tau_k = [(1/n) sum_{t=k+1..n} d_t^2 d_{t-k}^2] / gamma_0^2, d = x - mean, gamma_0 = (1/n) sum d_t^2.
    # Exact rational arithmetic (fractions.Fraction), rounded once at the end.
    n = row.size
    values = [Fraction(float(v)) for v in row]
    mean = sum(values) / n
    sq = [(v - mean) ** 2 for v in values]
    g0 = sum(sq) / n
    return np.array([float(sum(sq[t] * sq[t - k] for t in range(k, n)) / n / g0**2) for k in range(1, max_lag + 1)])


@pytest.mark.parametrize("method", ["direct", "fft", "auto"])
def test_robust_acf_variance_matches_the_formula_row_by_row(method):
    x = np.vstack([seeded_rows(150, 1), garch(2, 150, 2), 1e6 + seeded_rows(150, 3)[:1]])
    ours = robust_acf_variance(x, 12, method)
    for row, got in zip(x, ours):
        np.testing.assert_allclose(got, tau_loop(row, 12), rtol=1e-13, atol=0)  # published formula (above)
    np.testing.assert_array_equal(robust_acf_variance(x[:1], 12, method), ours[:1])  # m = 1


def test_robust_acf_variance_is_near_one_for_iid_and_above_one_under_garch():
    # Property of the formula (Lobato, Nankervis and Savin 2001): E tau_k is about (n - k)/n for i.i.d. values
    # (the sum has n - k terms over n); for GARCH(1,1) with alpha = 0.2, beta = 0.7 tau_1 = 1 + rho_1(e^2)
    # (kurtosis - 1), about 2.3 (GARCH moment formulas recalled from memory, hence the loose bound).
    n, K = 500, 5
    iid = np.random.default_rng(4).standard_normal((400, n))
    mean_tau = robust_acf_variance(iid, K).mean(axis=0)
    np.testing.assert_allclose(mean_tau, (n - np.arange(1, K + 1)) / n, atol=0.03)
    tau = robust_acf_variance(garch(200, 2000, 5), K)
    assert np.median(tau[:, 0]) > 1.5 and np.mean(tau[:, 0] > 1.0) > 0.95


def test_robust_portmanteau_matches_the_formula_and_chi2_sf():
    x = np.vstack([seeded_rows(200, 6), garch(2, 200, 7)])
    n, K = x.shape[1], 10
    r = np.vstack([sm_acf(row, nlags=K, adjusted=False, fft=False)[1:] for row in x])
    tau = robust_acf_variance(x, K)
    stat, df, p = robust_portmanteau(r, tau, n, [1, 2, 5, 10], model_df=2)
    for i in range(x.shape[0]):
        for j, L in enumerate([1, 2, 5, 10]):
            # Source: Q*_L = n sum_{k<=L} r_k^2 / tau_k (Lobato, Nankervis and Savin 2001), direct sum
            ref = n * sum(r[i, k] ** 2 / tau[i, k] for k in range(L))
            assert stat[i, j] == pytest.approx(ref, rel=1e-13)
            if L - 2 <= 0:
                assert np.isnan(p[i, j])
            else:  # Reference: scipy.stats.chi2.sf(Q, L - model_df)
                assert p[i, j] == pytest.approx(chi2.sf(ref, L - 2), rel=1e-12, abs=1e-300)
    assert df.tolist() == [-1, 0, 3, 8]


# ---- rank_acf ------------------------------------------------------------------------------------

def test_average_ranks_match_rankdata_with_ties():
    rng = np.random.default_rng(8)
    x = np.vstack([rng.integers(0, 6, (5, 40)).astype(float), rng.standard_normal((2, 40)), np.full((1, 40), 3.0)])
    x[5, [3, 9, 20]] = x[5, 0]  # a tie among continuous values
    # Reference: scipy.stats.rankdata(row, method="average")
    np.testing.assert_array_equal(average_ranks(x), np.vstack([rankdata(row) for row in x]))


@pytest.mark.parametrize("method", ["direct", "fft"])
def test_rank_acf_matches_statsmodels_acf_of_rankdata(method):
    rng = np.random.default_rng(9)
    x = np.vstack([seeded_rows(120, 10), np.round(rng.standard_normal((2, 120)) * 2)])  # the last two: many ties
    x[0, 17] = 1e9  # one huge value
    for row, got in zip(x, rank_acf(x, 15, method)):
        # Reference: statsmodels.tsa.stattools.acf(scipy.stats.rankdata(row), adjusted=False, fft=False)
        ref = sm_acf(rankdata(row), nlags=15, adjusted=False, fft=False)[1:]
        np.testing.assert_allclose(got, ref, rtol=0, atol=1e-13)


def test_rank_acf_has_the_exact_null_mean_over_all_permutations():
    # Source: E r_k = -(n - k)/(n (n - 1)) for an exchangeable sequence (Dufour and Roy 1985, as in
    # lagsight.engine.bands.null_mean), exact here: every ordering of 7 distinct values, equally likely.
    perms = np.array(list(itertools.permutations(range(7))), dtype=np.float64)
    np.testing.assert_allclose(rank_acf(perms, 6).mean(axis=0), null_mean(7, 6), rtol=1e-13, atol=0)


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


def test_kpss_of_an_exact_line_is_nan_without_warnings():
    x = np.vstack([2.0 * np.arange(50.0) + 1.0, np.random.default_rng(17).standard_normal(50)])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for nlags in ("legacy", "auto"):
            got = kpss_rows(x, "ct", nlags)
            assert np.isnan(got.statistic[0]) and np.isnan(got.p_value[0]) and not got.clipped[0]
            assert np.isfinite(got.statistic[1])


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


# ---- outlier_flags ---------------------------------------------------------------------------------

def test_outlier_z_matches_scipy_mad_and_a_loop():
    rng = np.random.default_rng(18)
    x = rng.standard_normal((4, 301))
    x[0, [5, 100]] = [12.0, -9.0]
    x[1, 7] = 4.0
    x[2, :200] = 1.0  # more than half equal: MAD zero
    got = outlier_flags(x)
    c = outlier_threshold(301)
    assert c == 5.0 and got.threshold.tolist() == [5.0] * 4
    for i, row in enumerate(x):
        med = np.median(row)
        # Reference: scipy.stats.median_abs_deviation(row, scale="normal")
        mad = median_abs_deviation(row, scale="normal")
        if mad == 0:
            assert np.isnan(got.z[i]).all() and not got.mask[i].any()
            continue
        z = [abs(v - med) / mad for v in row]  # direct loop
        np.testing.assert_allclose(got.z[i], z, rtol=1e-15)
        assert got.mask[i].tolist() == [v > c for v in z]
    assert np.flatnonzero(got.mask[0]).tolist() == [5, 100] and not got.mask[1].any()


def test_outlier_threshold_is_bonferroni_above_the_floor():
    # Reference: scipy.stats.norm.isf(alpha / (2 n)); the floor of 5 is common practice, no source
    assert outlier_threshold(10**6) == pytest.approx(norm.isf(0.01 / 2e6), rel=1e-14)
    assert outlier_threshold(10**6, alpha=0.05) == pytest.approx(norm.isf(0.05 / 2e6), rel=1e-14)
    assert outlier_threshold(1000) == 5.0
    got = outlier_flags(np.array([[0.0, 0.1, -0.1, 0.2, -0.2, 3.5]]), threshold=2.0)  # z: 0.2 .. 1.1, 15.5
    assert got.mask.tolist() == [[False, False, False, False, False, True]]


# ---- arch_lm_rows ----------------------------------------------------------------------------------

def test_arch_lm_matches_het_arch():
    x = np.vstack([garch(3, 300, 19), seeded_rows(300, 20)[[0, 4]]])
    for q in (1, 4, 12):
        got_centred = arch_lm_rows(x, q)
        got_raw = arch_lm_rows(x + 0.5, q, demean=False)
        for i, row in enumerate(x):
            # Reference: statsmodels.stats.diagnostic.het_arch(e, nlags=q) on the centred row and the raw row
            lm, p, *_ = het_arch(row - row.mean(), nlags=q, result_object=False)
            assert got_centred.statistic[i] == pytest.approx(lm, rel=1e-10, abs=1e-12)
            assert got_centred.p_value[i] == pytest.approx(p, rel=1e-10, abs=1e-15)
            lm, p, *_ = het_arch(row + 0.5, nlags=q, result_object=False)
            assert got_raw.statistic[i] == pytest.approx(lm, rel=1e-10, abs=1e-12)
            assert got_raw.p_value[i] == pytest.approx(p, rel=1e-10, abs=1e-15)
    # Power under GARCH(1,1): a seeded simulation, not a reference.
    assert (arch_lm_rows(garch(20, 1000, 22), 4).p_value < 0.01).mean() > 0.8


def test_arch_lm_matches_het_arch_on_a_dataset_and_in_chunks(monkeypatch):
    e = np.diff(np.log(DATASETS["realgdp"]))
    # Reference: statsmodels.stats.diagnostic.het_arch(e - mean, nlags=4), statsmodels.datasets macrodata
    lm, p, *_ = het_arch(e - e.mean(), nlags=4, result_object=False)
    got = arch_lm_rows(e[None], 4)
    assert got.statistic[0] == pytest.approx(lm, rel=1e-12) and got.p_value[0] == pytest.approx(p, rel=1e-12)
    x = garch(5, 200, 23)
    whole = arch_lm_rows(x, 3)
    monkeypatch.setattr(evidence, "CHUNK_VALUES", 1)  # one row per chunk
    np.testing.assert_array_equal(arch_lm_rows(x, 3).statistic, whole.statistic)


# ---- every function: a row gets the same bits alone as in a batch -------------------------------------

def test_rows_alone_equal_rows_in_a_batch():
    x = np.vstack([seeded_rows(120, 24), garch(2, 120, 25)])
    batched = [robust_acf_variance(x, 10), rank_acf(x, 10), adf_trend_rows(x).statistic,
               kpss_rows(x, "ct", "auto").statistic, trend_slope(x).se, outlier_flags(x).z,
               arch_lm_rows(x, 4).statistic]
    for i in range(x.shape[0]):
        row = x[i:i + 1]
        alone = [robust_acf_variance(row, 10), rank_acf(row, 10), adf_trend_rows(row).statistic,
                 kpss_rows(row, "ct", "auto").statistic, trend_slope(row).se, outlier_flags(row).z,
                 arch_lm_rows(row, 4).statistic]
        for a, b in zip(alone, batched):
            np.testing.assert_array_equal(a[0], b[i])

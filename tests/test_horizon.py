"""The horizon option: h-step forecast errors are judged on lags h and beyond.

The error of the optimal h-step forecast of an AR(1) series x_t = phi x_{t-1} + e_t is
sum_{j<h} phi^j e_{t+h-j}, an MA(h - 1) (Box, Jenkins, Reinsel and Ljung 2015, chapter 5: the forecast error
is the sum of the next h shocks weighted by the psi-weights, psi_j = phi^j for an AR(1)). Simulation targets
below are seeded; each rate is stated with its Monte Carlo standard error. A test that does not reject is no
proof of white noise.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import toeplitz
from statsmodels.stats.diagnostic import acorr_ljungbox

from lagsight import create_app, options
from lagsight.engine import horizon as ahead
from lagsight.engine.analysis import Spec, analyse
from lagsight.engine.autocorrelation import acf
from lagsight.engine.bands import acf_band
from lagsight.outputs.shared import merged

from .spec_tools import assert_valid

LEVEL = 0.9 * 0.05  # the autocorrelation channel's level at confidence 0.95 (consult/decision.py)


def forecast_errors(rng, m: int, n: int, phi: float, h: int) -> np.ndarray:
    """Errors of the optimal h-step forecasts of AR(1) series: sum_{j<h} phi^j e_{t+h-j} (an MA(h - 1))."""
    e = rng.standard_normal((m, n + h - 1))
    out = np.zeros((m, n))
    for j in range(h):
        out += phi ** j * e[:, h - 1 - j: h - 1 - j + n]
    return out


def ar1(rng, m: int, n: int, phi: float, burn: int = 100) -> np.ndarray:
    e = rng.standard_normal((m, n + burn))
    x = np.zeros_like(e)
    for t in range(1, n + burn):
        x[:, t] = phi * x[:, t - 1] + e[:, t]
    return x[:, burn:]


def rejection_rate(x: np.ndarray, h: int, model_df: int = 0) -> float:
    n = x.shape[1]
    K = max(options.default_max_lag(n, None), h)
    spec = Spec(max_lag=K, confidence=0.95, model_df=model_df, test_lags=(K,), short_lag=options.short_lag(n, K, None),
                period=None, horizon=h, tests=("ljung_box",), report_extras=False, seasonal_strength=False)
    return float((analyse(x, spec).evidence.p_autocorrelation < LEVEL).mean())


def test_bartlett_factor_is_the_bartlett_band_variance_at_lag_h():
    # Reference: the bartlett band's variance (1 + 2 sum_{j<k} r_j^2)/n at k = h (engine/bands.py, Box, Jenkins,
    # Reinsel and Ljung 2015, section 2.1.6), which the tests of bands.py check against its formula.
    rng = np.random.default_rng(1)
    x = forecast_errors(rng, 5, 120, 0.7, 4)
    r = acf(x, 12)
    band = acf_band("bartlett", r, 120, 0.95)
    for h in (1, 2, 4, 6):
        np.testing.assert_allclose(ahead.bartlett_factor(r, h) / 120, band.se[:, h - 1] ** 2, rtol=1e-12)


def test_lag_correlation_and_box_scale_match_the_explicit_matrix():
    # Reference: Bartlett's large-lag covariance cov(r_k, r_{k+s}) = (1/n) sum_v rho_v rho_{v+s} written out term
    # by term for an MA(1) (rho_1 = 0.4: c_1 = 2 rho_1 / (1 + 2 rho_1^2), c_2 = rho_1^2 / (1 + 2 rho_1^2)), and
    # Box (1954)'s a = tr(C^2)/tr(C), b = tr(C)^2/tr(C^2) computed on the full matrix (scipy.linalg.toeplitz).
    r = np.array([[0.4, 0.0, 0.0]])
    c = ahead.lag_correlation(r, 2)
    np.testing.assert_allclose(c[0], [1.0, 0.8 / 1.32, 0.16 / 1.32], rtol=1e-12)
    rng = np.random.default_rng(2)
    r = rng.uniform(-0.5, 0.7, (3, 6))
    for h, count in ((3, 1), (3, 4), (4, 9)):
        c = ahead.lag_correlation(r, h)
        a, b = ahead.sum_scale(c, count)
        for i in range(3):
            column = np.zeros(count)
            column[: min(count, c.shape[1])] = c[i, :count]
            C = toeplitz(column)
            tr, tr2 = np.trace(C), np.trace(C @ C)
            assert a[i] == pytest.approx(tr2 / tr, rel=1e-12) and b[i] == pytest.approx(tr * tr / tr2, rel=1e-12)


def test_horizon_one_is_the_usual_ljung_box():
    # Reference: statsmodels.stats.diagnostic.acorr_ljungbox (lags 5 and 12, model_df 1).
    rng = np.random.default_rng(3)
    x = rng.standard_normal(150)
    stat, df, p = ahead.portmanteau_from(acf(x[None, :], 12), 150, [5, 12], 1, model_df=1)
    ref = acorr_ljungbox(x, lags=[5, 12], model_df=1)
    np.testing.assert_allclose(stat[0], ref["lb_stat"].to_numpy(), rtol=1e-10)
    np.testing.assert_allclose(p[0], ref["lb_pvalue"].to_numpy(), rtol=1e-8)
    assert list(df) == [4, 11]


@pytest.mark.parametrize("n", [60, 200])
def test_optimal_forecast_errors_are_judged_white_at_about_the_nominal_rate(n):
    # 300 series per (phi, h): a rate's Monte Carlo standard error is about sqrt(0.045 * 0.955 / 300) = 0.012;
    # each is allowed 3 standard errors above the level, and the pooled rate (3,600 series, standard error 0.0035)
    # must lie between a third of the level (so the lags >= h keep their power) and 3 standard errors above it.
    rng = np.random.default_rng([7, n])
    rates = {}
    for phi in (0.5, 0.8):
        for h in range(1, 7):
            rates[phi, h] = rejection_rate(forecast_errors(rng, 300, n, phi, h), h)
    se = np.sqrt(LEVEL * (1 - LEVEL) / 300)
    assert max(rates.values()) <= LEVEL + 3 * se, rates
    pooled = float(np.mean(list(rates.values())))
    pooled_se = np.sqrt(LEVEL * (1 - LEVEL) / (300 * len(rates)))
    assert LEVEL / 3 <= pooled <= LEVEL + 3 * pooled_se, (pooled, rates)


def test_without_the_horizon_multi_step_errors_are_flagged():
    # The reason for the option: the same errors read as one-step values are called autocorrelated.
    rng = np.random.default_rng(8)
    assert rejection_rate(forecast_errors(rng, 200, 200, 0.8, 3), 1) > 0.95


def test_structure_beyond_the_horizon_is_still_found():
    # Errors of a wrong model: forecasts phi_hat^h x_t with phi_hat = 0.4 for AR(1) series with phi = 0.8 leave
    # (0.8^h - 0.4^h) x_t in the error, correlated at every lag. Measured with this seed: 1.00 at h = 2 and 0.82
    # at h = 4 (n = 300, 200 series); the power falls with h, as the Bartlett variance grows.
    rng = np.random.default_rng(9)
    for h, least in ((2, 0.95), (4, 0.6)):
        x = ar1(rng, 200, 300 + h, 0.8)
        assert rejection_rate(x[:, h:] - 0.4 ** h * x[:, :-h], h) >= least


def test_fitted_model_errors_with_model_df_stay_within_the_level():
    # h-step errors of an AR(1) whose phi is estimated (least squares on lag 1): with model_df = 1 subtracted from the
    # sums' degrees of freedom the rate stays near the level (a hand run, not committed: 0.02-0.055 over n = 100, 300
    # and h = 2, 4, 6; without it 0.01-0.03). Here n = 200, h = 3, 400 series: at most the level plus 3 standard errors (0.031).
    rng = np.random.default_rng(10)
    h = 3
    x = ar1(rng, 400, 200 + h, 0.8)
    phi = (x[:, 1:] * x[:, :-1]).sum(axis=1) / (x[:, :-1] ** 2).sum(axis=1)
    errors = x[:, h:] - (phi ** h)[:, None] * x[:, :-h]
    assert rejection_rate(errors, h, model_df=1) <= LEVEL + 3 * np.sqrt(LEVEL * (1 - LEVEL) / 400)


@pytest.fixture(scope="module")
def client():
    return create_app({"TESTING": True}).test_client()


def _errors(h: int, n: int = 200, seed: int = 11) -> list[float]:
    return forecast_errors(np.random.default_rng(seed), 1, n, 0.8, h)[0].tolist()


def test_the_report_says_which_lags_are_tested(client):
    body = client.post("/v1/diagnostics", json={"values": _errors(4), "horizon": 4}).get_json()
    assert_valid(body, "Report")
    assert body["horizon"] == 4
    assert "lags 4 to" in body["verdict"]["summary"] or "lag 4" in body["verdict"]["summary"]
    assert any("lags 1 to 3 are not tested" in c for c in body["cautions"])
    assert body["exceedances"]["lags_tested"] == body["max_lag"] - 3
    assert all(lag >= 4 for lag in body["exceedances"]["far"] + body["exceedances"]["marginal"])
    assert all(e["lag"] is None or e["lag"] >= 4 for e in body["verdict"]["evidence"])
    lb = [t for t in body["tests"] if t["name"] == "ljung_box"]
    assert all(t["df"] == t["lag"] - 3 and t["details"]["from_lag"] == 4 for t in lb)
    # The band from lag 4 on has Bartlett's variance with r_1..r_3 as estimated.
    r = body["acf"]["values"]
    se = np.sqrt((1 + 2 * sum(v * v for v in r[:3])) / body["n"])
    np.testing.assert_allclose(body["acf"]["standard_error"][3:], se, rtol=1e-12)
    np.testing.assert_allclose(body["acf"]["standard_error"][:3], 1 / np.sqrt(body["n"]), rtol=1e-12)


def test_model_df_and_horizon_together(client):
    body = client.post("/v1/diagnostics", json={"values": _errors(3), "horizon": 3, "model_df": 2}).get_json()
    lb = [t for t in body["tests"] if t["name"] == "ljung_box"]
    assert all(t["df"] == t["lag"] - 2 - 2 for t in lb)
    assert any("model_df = 2 is subtracted" in c for c in body["cautions"])


def test_horizon_errors_and_forms(client):
    r = client.post("/v1/diagnostics", json={"values": _errors(2, 40), "horizon": 12, "max_lag": 8})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/horizon"
    r = client.post("/v1/diagnostics", json={"values": _errors(2), "horizon": 0})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/horizon"
    r = client.post("/v1/diagnostics", json={"values": _errors(2), "horizon": 2, "p_values": "monte_carlo"})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/p_values"
    values = _errors(3, 60)
    got = client.get("/v1/diagnostics?horizon=3&values=" + ",".join(repr(v) for v in values)).get_json()
    assert got["horizon"] == 3
    csv = "\n".join(repr(v) for v in values) + "\n"
    got = client.post("/v1/diagnostics?horizon=3&header=false", data=csv, content_type="text/csv").get_json()
    assert got["horizon"] == 3


def test_batch_shares_and_overrides_the_horizon(client):
    x = _errors(3)
    body = client.post("/v1/diagnostics/batch", json={"horizon": 3, "series": [
        {"id": "shared", "values": x}, {"id": "own", "values": x, "horizon": 1},
        {"id": "bad", "values": x, "horizon": 0}]}).get_json()
    shared, own, bad = (r if "error" in r else merged(r, body.get("shared", {})) for r in body["results"])
    assert shared["horizon"] == 3 and own["horizon"] == 1
    assert shared["verdict"]["white_noise"] is True and own["verdict"]["white_noise"] is False
    assert bad["error"]["errors"][0]["pointer"] == "/series/2/horizon"
    single = client.post("/v1/diagnostics", json={"values": x, "horizon": 3}).get_json()
    assert {k: v for k, v in merged(shared, body["shared"]).items() if k != "id"} == single


def test_a_horizon_of_two_reads_in_the_singular(client):
    body = client.post("/v1/diagnostics", json={"values": _errors(2), "horizon": 2}).get_json()
    assert "lag 1 is not tested" in body["verdict"]["summary"] or body["verdict"]["white_noise"] is False
    assert any("lag 1 is not tested" in c for c in body["cautions"])
    assert all("lags 1 to 1" not in line for line in [*body["interpretation"], *body["cautions"]])


@pytest.mark.parametrize("horizon,max_lag,model_df", [(4, 4, 1), (2, 2, 1), (3, 4, 2)])
def test_no_judgement_when_model_df_uses_up_the_lags_tested(client, horizon, max_lag, model_df):
    # Only lags horizon..max_lag are summed: with model_df at least their count no sum has a degree of freedom.
    body = client.post("/v1/diagnostics", json={"values": _errors(1), "horizon": horizon, "max_lag": max_lag,
                                                "model_df": model_df}).get_json()
    # Before, the rule counted lags 1..max_lag and called such series white noise with every sum not computable.
    assert body["verdict"]["white_noise"] is None and body["verdict"]["summary"].startswith("No judgement")
    notes = [t["note"] for t in body["tests"] if t["name"] == "ljung_box" and t["df"] is None]
    assert notes and all(f"test at a lag above {horizon - 1 + model_df}" in n for n in notes)


def test_a_brief_batch_says_once_that_lags_below_the_horizon_are_not_tested(client):
    body = client.post("/v1/diagnostics/batch", json={"horizon": 3, "detail": "brief", "series": [
        {"id": "a", "values": _errors(3)}, {"id": "b", "values": _errors(3)[:40]}]}).get_json()
    assert any("3-step forecast errors" in c and "not tested" in c for c in body["cautions"])
    plain = client.post("/v1/diagnostics/batch", json={"detail": "brief", "series": [
        {"id": "a", "values": _errors(3)}]}).get_json()
    assert not any("forecast errors" in c for c in plain["cautions"])

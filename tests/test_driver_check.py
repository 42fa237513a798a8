"""POST /v1/driver-check: prewhitening and cross-correlation against references, the reading, and bad input."""
from __future__ import annotations

import numpy as np
import pytest
from scipy.signal import lfilter
from scipy.stats import chi2
from statsmodels.tsa.ar_model import AutoReg, ar_select_order
from statsmodels.tsa.stattools import ccf

from lagsight import create_app

from .spec_tools import assert_problem_at, assert_valid, spec

URL = "/v1/driver-check"


def _ar1(rng: np.random.Generator, n: int, phi: float) -> np.ndarray:
    """A seeded stationary AR(1) path with unit shocks (simulated, not a reference)."""
    e = rng.standard_normal(n + 100)
    x = np.zeros(n + 100)
    for t in range(1, n + 100):
        x[t] = phi * x[t - 1] + e[t]
    return x[100:]


def _lagged_pair(seed: int, n: int = 200, lag: int = 3, beta: float = 0.4):
    """A series that the driver enters at ``lag``: y_t = beta x_{t-lag} + AR(1) noise."""
    rng = np.random.default_rng(seed)
    x = _ar1(rng, n + lag, 0.7)
    y = beta * x[:-lag] + _ar1(rng, n, 0.5)
    return y, x[lag:]


def _post(client, body, status=200):
    r = client.post(URL, json=body)
    assert r.status_code == status, r.get_json()
    return r.get_json()


def test_prewhitened_cross_correlation_and_haugh_test_match_references(client):
    y, x = _lagged_pair(4)
    body = _post(client, {"values": y.tolist(), "drivers": [{"name": "price", "values": x.tolist()}]})
    assert_valid(body, "DriverCheckResponse")
    d = body["drivers"][0]
    # The driver's AR order by AIC: statsmodels.tsa.ar_model.ar_select_order(x, 10, ic="aic", trend="c").
    lags = ar_select_order(x, 10, ic="aic", trend="c").ar_lags
    p = max(lags) if lags else 0
    fit = AutoReg(x, lags=p, trend="c").fit()
    assert d["prewhitening"]["ar_order"] == p and d["prewhitening"]["coefficients"] == pytest.approx(
        list(fit.params[1:]), rel=1e-10)
    # The series through the driver's filter, by scipy.signal.lfilter (an independent implementation),
    # and the cross-correlation by statsmodels.tsa.stattools.ccf (adjusted=False): ccf(beta, alpha)[k] is the
    # correlation of beta_t with alpha_{t-k} (driver leading), ccf(alpha, beta)[k] the lag -k.
    alpha = fit.resid
    beta = lfilter(np.r_[1.0, -fit.params[1:]], [1.0], y - y.mean())[p:]
    assert d["n_used"] == alpha.size == beta.size == 200 - p
    K = d["max_lag"]
    assert K == 10 and d["lags"] == list(range(-10, 11))
    lead = ccf(beta, alpha, adjusted=False, fft=False)[: K + 1]
    follow = ccf(alpha, beta, adjusted=False, fft=False)[1: K + 1]
    assert d["cross_correlation"] == pytest.approx(list(follow[::-1]) + list(lead), abs=1e-12)
    assert d["upper"] == pytest.approx(1.959963984540054 / np.sqrt(200 - p))
    # Haugh (1976): S* = N^2 sum r_uv(k)^2 / (N - |k|) on the two series' own AR residuals, chi-square on 2K + 1
    # (the formula recalled from the paper; scipy.stats.chi2.sf for the p-value).
    q_lags = ar_select_order(y, 10, ic="aic", trend="c").ar_lags
    q = max(q_lags) if q_lags else 0
    u = AutoReg(y, lags=q, trend="c").fit().resid if q else y - y.mean()
    start = max(p, q)
    u, v = u[start - q:], alpha[start - p:]
    N = u.size
    r = np.r_[ccf(v, u, adjusted=False, fft=False)[1: K + 1][::-1], ccf(u, v, adjusted=False, fft=False)[: K + 1]]
    stat = N * N * np.sum(r ** 2 / (N - np.abs(np.arange(-K, K + 1))))
    assert d["haugh"]["statistic"] == pytest.approx(stat, rel=1e-10) and d["haugh"]["df"] == 21
    assert d["haugh"]["p_value"] == pytest.approx(chi2.sf(stat, 21), rel=1e-8)


def test_a_driver_entering_at_lag_3_is_read_as_leading(client):
    y, x = _lagged_pair(11)
    d = _post(client, {"values": y.tolist(), "drivers": [{"name": "price", "values": x.tolist()}]})["drivers"][0]
    assert d["moves_with_series"] is True and 3 in d["key_lags"] and d["direction"] == "driver_leads"
    assert d["largest"]["lag"] == 3 and d["largest"]["value"] > d["simultaneous_upper"]
    assert "lag 3" in d["advice"][0]["action"] and "still moves" in d["reading"][0]


def test_a_driver_that_follows_the_series_is_read_as_feedback(client):
    rng = np.random.default_rng(5)
    y = _ar1(rng, 202, 0.6)
    x = 0.8 * y[:-2] + rng.standard_normal(200)  # the driver echoes the series two steps later: x_t ~ y_{t-2}
    d = _post(client, {"values": y[2:].tolist(), "drivers": [{"name": "orders", "values": x.tolist()}]})["drivers"][0]
    assert d["moves_with_series"] is True and d["largest"]["lag"] == -2 and d["direction"] == "series_leads"
    assert d["advice"][0]["action"].startswith("Do not expect orders")


def test_an_unrelated_driver_is_not_linked_and_drivers_line_up_by_timestamps(client):
    rng = np.random.default_rng(8)
    y, z = _ar1(rng, 300, 0.8), _ar1(rng, 300, 0.8)
    days = [str(np.datetime64("2024-01-01") + i) for i in range(300)]
    body = _post(client, {"values": y[:200].tolist(), "timestamps": days[:200],
                          "drivers": [{"name": "rain", "values": z[50:].tolist(), "timestamps": days[50:]}]})
    d = body["drivers"][0]
    assert d["n"] == 150 and d["start_time"] == days[50] and d["end_time"] == days[199]
    assert d["moves_with_series"] is False and d["key_lags"] == [] and d["direction"] is None
    assert d["advice"][0]["action"] == "No need to add rain on this evidence."
    assert_valid(body, "DriverCheckResponse")


def _series(n=60, seed=1):
    return np.random.default_rng(seed).standard_normal(n).tolist()


BAD = [
    ({"values": _series(), "drivers": [{"name": "a", "values": _series(50)}]}, "/drivers/0/values", "same number"),
    ({"values": _series(), "drivers": []}, "/drivers", "length"),
    ({"values": _series()}, "/drivers", "required"),
    ({"values": _series(), "drivers": [{"name": "a", "values": _series()}, {"name": "a", "values": _series()}]},
     "/drivers", "own name"),
    ({"values": _series(), "drivers": [{"name": f"d{i}", "values": _series()} for i in range(11)]}, "/drivers", ""),
    ({"values": _series(), "drivers": [{"name": "a", "values": [1.0] * 60}]}, "/drivers/0/values", "constant"),
    ({"values": _series(), "drivers": [{"name": "a", "values": _series()}], "missing": "pairwise"}, "/missing",
     "interpolate"),
    ({"values": _series(), "drivers": [{"name": "a", "values": _series()}], "max_lag": 16}, "/max_lag", "quarter"),
    ({"values": _series(), "drivers": [{"name": "a", "values": [1, 2, "x"] + _series(57)}]}, "/drivers/0/values/2",
     "number"),
    ({"values": _series(), "drivers": [{"name": "a", "values": [1.0, None] + _series(58)}]}, "/drivers/0/values/1",
     "missing"),
    ({"values": _series(), "drivers": [{"name": "a", "values": _series(), "timestamps": ["2024-01-01"]}]},
     "/drivers/0/timestamps", "same length"),
    ({"values": _series(), "timestamps": [str(np.datetime64("2024-01-01") + i) for i in range(60)],
      "drivers": [{"name": "a", "values": _series(),
                   "timestamps": [str(np.datetime64("2024-02-20") + i) for i in range(60)]}]},
     "/drivers/0/timestamps", "shares 10 time"),
    ({"values": _series(15), "drivers": [{"name": "a", "values": _series(15)}]}, "/drivers/0/values", "at least 20"),
    ({"values": _series(), "drivers": [{"name": "", "values": _series()}]}, "/drivers/0/name", ""),
]


@pytest.mark.parametrize("body,pointer,phrase", BAD)
def test_bad_input_is_422_with_a_pointer(client, body, pointer, phrase):
    assert_problem_at(client.post(URL, json=body), pointer, phrase)


def test_http_errors_limits_auth_metrics_and_the_openapi_example(client):
    assert client.post(URL, data=b"{", content_type="application/json").status_code == 400
    assert client.post(URL, data=b"1", content_type="text/plain").status_code == 415
    assert client.post(URL, json={"values": [1]}, headers={"Accept": "text/csv"}).status_code == 406
    body = {"values": _series(), "drivers": [{"name": "a", "values": _series(seed=2)}]}
    small = create_app({"TESTING": True, "MAX_BATCH_POINTS": 100}).test_client()
    r = small.post(URL, json=body)
    assert r.status_code == 413 and r.get_json()["errors"][0]["pointer"] == "/drivers"
    guarded = create_app({"TESTING": True, "AUTH_TOKENS": ("s3cret",)}).test_client()
    assert guarded.post(URL, json=body).status_code == 401
    assert guarded.post(URL, json=body, headers={"Authorization": "Bearer s3cret"}).status_code == 200
    example = spec()["paths"][URL]["post"]["requestBody"]["content"]["application/json"]["example"]

    def analysed():
        text = client.get("/metrics").get_data(as_text=True)
        return float(next(line.split()[1] for line in text.splitlines()
                          if line.startswith("lagsight_series_analysed_total ")))

    before = analysed()
    answer = _post(client, example)
    assert_valid(answer, "DriverCheckResponse")
    assert analysed() - before == 2 and answer["drivers"][0]["max_lag"] == 3

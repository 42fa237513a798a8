"""Transforms: each step against numpy, pandas, scipy or statsmodels on named data, and the 422s."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import signal, stats
from statsmodels.base.transform import BoxCox
from statsmodels.tsa.statespace.tools import diff as sm_diff
from statsmodels.tsa.stattools import acf as sm_acf
from statsmodels.tsa.tsatools import detrend as sm_detrend

from lagsight.inputs import transforms
from lagsight.outputs.shared import merged

from .spec_tools import assert_valid

URL = "/v1/diagnostics"


def _gdp() -> np.ndarray:
    """statsmodels.datasets.macrodata realgdp: 203 quarters, all positive."""
    return sm.datasets.macrodata.load_pandas().data["realgdp"].to_numpy(dtype=float, copy=True)


def _co2_weekly() -> pd.Series:
    """statsmodels.datasets.co2: weekly, with 59 NaN."""
    return sm.datasets.co2.load_pandas().data["co2"]


def test_log_against_numpy():
    x = _gdp()
    y, steps, dropped = transforms.apply(x, {"log": True}, None)
    np.testing.assert_array_equal(y, np.log(x))  # numpy.log
    assert steps == [{"step": "log", "order": None, "lag": None, "lambda": None, "lambda_source": None, "n_after": 203}]


def test_box_cox_given_lambda_against_scipy():
    x = _gdp()
    y, steps, _ = transforms.apply(x, {"box_cox": 0.25}, None)
    np.testing.assert_allclose(y, stats.boxcox(x, lmbda=0.25), rtol=1e-14)  # scipy.stats.boxcox(x, lmbda)
    assert steps[0]["lambda"] == 0.25 and steps[0]["lambda_source"] == "request"


def test_box_cox_estimated_lambda_against_statsmodels_profile_likelihood():
    x = _gdp()
    y, steps, _ = transforms.apply(x, {"box_cox": "estimate"}, None)
    # statsmodels.base.transform.BoxCox().transform_boxcox(x, method="loglik") maximises the same
    # profile log-likelihood with its own optimiser: lambdas agree to about 1e-5.
    ref_y, ref_lambda = BoxCox().transform_boxcox(x, method="loglik")
    assert steps[0]["lambda"] == pytest.approx(ref_lambda, abs=1e-4)
    assert steps[0]["lambda_source"] == "estimated"
    np.testing.assert_allclose(y, stats.boxcox(x, lmbda=steps[0]["lambda"]), rtol=1e-14)


def _positive_reference_series() -> dict[str, np.ndarray]:
    """Positive series from statsmodels.datasets (macrodata, co2 without its gaps, nile, sunspots + 1, elnino)."""
    macro = sm.datasets.macrodata.load_pandas().data
    return {
        "realgdp": _gdp(),
        "cpi": macro["cpi"].to_numpy(dtype=float),
        "unemp": macro["unemp"].to_numpy(dtype=float),
        "co2": _co2_weekly().dropna().to_numpy(dtype=float),
        "nile": sm.datasets.nile.load_pandas().data["volume"].to_numpy(dtype=float),
        "sunspots_plus_1": sm.datasets.sunspots.load_pandas().data["SUNACTIVITY"].to_numpy(dtype=float) + 1.0,
        "elnino": sm.datasets.elnino.load_pandas().data.iloc[:, 1:].to_numpy(dtype=float).ravel(),
    }


@pytest.mark.parametrize("name", sorted(_positive_reference_series()))
def test_box_cox_estimated_lambda_against_scipy_boxcox_normmax(name):
    # Reference: scipy.stats.boxcox_normmax(x, method="mle"), the same likelihood and optimiser run
    # through scipy's own (slower) evaluation: the lambdas agree to the optimiser's tolerance.
    import warnings

    x = _positive_reference_series()[name]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        expected = stats.boxcox_normmax(x, method="mle")
    assert transforms.box_cox_lambda(x) == pytest.approx(expected, rel=1e-6, abs=1e-7)


def test_box_cox_estimate_keeps_scipys_constraint_against_overflow():
    # Reference: scipy.stats.boxcox_normmax, which lowers lambda (with a warning) when the optimum would
    # send the transformed values past float64's range / 10000; values near 1e100 (invented, as a check).
    import warnings

    x = 1e100 * (1 + 0.01 * np.random.default_rng(6).standard_normal(60)) ** 3
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        expected = stats.boxcox_normmax(x, method="mle")
    assert caught, "the case must be one scipy constrains"
    assert transforms.box_cox_lambda(x) == expected
    assert np.isfinite(stats.boxcox(x, lmbda=expected)).all()


@pytest.mark.parametrize("d,D,m", [(1, 0, None), (2, 0, None), (0, 1, 4), (1, 1, 4), (2, 2, 4), (0, 1, 12)])
def test_differences_against_statsmodels_diff(d, D, m):
    x = _gdp()
    y, steps, dropped = transforms.apply(x, {"difference": d, "seasonal_difference": D}, m)
    # statsmodels.tsa.statespace.tools.diff(x, k_diff=d, k_seasonal_diff=D, seasonal_periods=m)
    ref = sm_diff(x, k_diff=d, k_seasonal_diff=D, seasonal_periods=m or 1)
    np.testing.assert_allclose(y, ref, rtol=1e-12, atol=1e-9)
    assert dropped == d + D * (m or 0) and y.size == x.size - dropped


def test_difference_against_pandas_and_numpy():
    x = _gdp()
    y, _, _ = transforms.apply(x, {"difference": 1, "seasonal_difference": 1}, 4)
    s = pd.Series(x)
    np.testing.assert_allclose(y, s.diff().diff(4).dropna().to_numpy(), rtol=1e-12)  # pandas Series.diff
    y2, _, _ = transforms.apply(x, {"difference": 2}, None)
    np.testing.assert_allclose(y2, np.diff(x, n=2), rtol=1e-12)  # numpy.diff(x, n=2)


def test_detrend_against_scipy_and_statsmodels():
    x = _gdp()
    y, _, _ = transforms.apply(x, {"detrend": "linear"}, None)
    np.testing.assert_allclose(y, signal.detrend(x, type="linear"), atol=1e-8)  # scipy.signal.detrend
    np.testing.assert_allclose(y, sm_detrend(x, order=1), atol=1e-8)  # statsmodels.tsa.tsatools.detrend


def test_detrend_near_the_float_limit_matches_the_scaled_fit():
    x = _gdp() * 1e304  # realgdp scaled towards the float64 limit: the sums would overflow unscaled
    y, _, _ = transforms.apply(x, {"detrend": "linear"}, None)
    np.testing.assert_allclose(y / 1e304, signal.detrend(x / 1e304, type="linear"), atol=1e-8)


def test_detrend_with_missing_fits_on_observed_points():
    s = _co2_weekly().iloc[:400]
    x = s.to_numpy(dtype=float, copy=True)
    y, _, _ = transforms.apply(x, {"detrend": "linear"}, None)
    ok = ~np.isnan(x)
    t = np.arange(x.size)
    fit = np.polyfit(t[ok], x[ok], 1)  # numpy.polyfit degree 1 on the observed points
    np.testing.assert_allclose(y[ok], x[ok] - np.polyval(fit, t[ok]), atol=1e-9)
    assert np.isnan(y[~ok]).all()


def test_all_steps_in_the_stated_order_over_http(client):
    x = _gdp()
    stamps = [d.date().isoformat() for d in pd.date_range("1959-01-01", periods=x.size, freq="QS")]
    body = client.post(URL, json={"values": x.tolist(), "timestamps": stamps, "max_lag": 8, "transform": {
        "log": True, "difference": 1, "seasonal_difference": 1, "detrend": "linear"}}).get_json()
    assert_valid(body, "Report")
    assert [s["step"] for s in body["transform"]["steps"]] == ["log", "difference", "seasonal_difference", "detrend"]
    assert body["transform"]["steps"][2]["lag"] == 4 and body["transform"]["n_before"] == 203
    assert body["n"] == body["transform"]["n_after"] == 203 - 1 - 4
    expected = signal.detrend(pd.Series(np.log(x)).diff().diff(4).dropna().to_numpy())
    # statsmodels.tsa.stattools.acf of the series transformed with numpy/pandas/scipy.
    np.testing.assert_allclose(body["acf"]["values"], sm_acf(expected, nlags=8, fft=False)[1:], atol=1e-10)


def test_pairwise_differences_propagate_missing_co2_weekly(client):
    s = _co2_weekly().iloc[:300]
    stamps = [t.date().isoformat() for t in s.index]
    values = [None if np.isnan(v) else v for v in s]
    body = client.post(URL, json={"values": values, "timestamps": stamps, "missing": "pairwise", "max_lag": 10,
                                  "transform": {"difference": 1}}).get_json()
    assert body["frequency"] == "weekly" and body["period"] == 52
    d = s.diff().iloc[1:]  # pandas: NaN where either neighbour is missing
    assert body["n"] == int(d.notna().sum()) and body["missing"]["remaining"] == int(d.isna().sum())
    dm = d - d.mean()
    n = d.size
    c = [(dm * dm.shift(-k)).mean() * (n - k) / n for k in range(11)]
    np.testing.assert_allclose(body["acf"]["values"], np.array(c[1:]) / c[0], atol=1e-12)


BAD = [
    # statsmodels.datasets.sunspots has years with zero activity: log and Box-Cox are undefined there.
    ("sunspots", {"log": True}, None, "/transform/log", "positive"),
    ("sunspots", {"box_cox": "estimate"}, None, "/transform/box_cox", "positive"),
    ("gdp", {"log": True, "box_cox": 0.5}, None, "/transform/box_cox", "not both"),
    ("gdp", {"seasonal_difference": 1}, None, "/transform/seasonal_difference", "period"),
    ("short", {"difference": 3}, None, "/transform/difference", "fewer than"),
    ("short", {"seasonal_difference": 1}, 4, "/transform/seasonal_difference", "fewer than"),
    ("gdp", {"difference": 4}, None, "/transform/difference", ""),
    ("gdp", {"detrend": "quadratic"}, None, "/transform/detrend", ""),
    ("gdp", {"box_cox": "auto"}, None, "/transform/box_cox", "estimate"),
    ("gdp", {"box_cox": 9}, None, "/transform/box_cox", ""),
    ("gdp", {"log": 1}, None, "/transform/log", "true or false"),
    ("gdp", {"lag": 1}, None, "/transform/lag", "Unknown"),
    ("line", {"difference": 2}, None, "/transform", "constant"),
    # A straight line with a non-dyadic slope, differenced, varies only by rounding error: still constant.
    ("ramp", {"difference": 1}, None, "/transform", "constant"),
    ("ramp", {"detrend": "linear"}, None, "/transform", "constant"),
    ("huge", {"difference": 1}, None, "/transform/difference", "overflows"),
    ("huge_positive", {"box_cox": 5}, None, "/transform/box_cox", "overflows"),
]


@pytest.mark.parametrize("data,transform,period,pointer,phrase", BAD)
def test_invalid_transforms_are_422_with_pointer(client, data, transform, period, pointer, phrase):
    values = {
        "sunspots": lambda: sm.datasets.sunspots.load_pandas().data["SUNACTIVITY"].tolist(),
        "gdp": lambda: _gdp().tolist(),
        "short": lambda: [3.0, 1.0, 4.0, 1.0, 5.0],
        "line": lambda: [1.0, 3.0, 5.0, 7.0, 9.0, 11.0, 13.0],
        "ramp": lambda: [3.0 + 0.1 * i for i in range(12)],
        "huge": lambda: [1.7e308, -1.7e308, 1.6e308, -1.5e308, 1.7e308, -1.2e308],
        "huge_positive": lambda: [1.7e308, 1.6e308, 1.5e308, 1.2e308, 1.1e308, 1.3e308],
    }[data]()
    r = client.post(URL, json={"values": values, "period": period, "transform": transform})
    assert r.status_code == 422, r.get_json()
    errors = r.get_json()["errors"]
    assert pointer in [e["pointer"] for e in errors]
    assert phrase.lower() in next(e["detail"] for e in errors if e["pointer"] == pointer).lower()


def test_batch_series_take_their_own_missing_and_transform_with_pointers_under_the_item(client):
    series = [
        {"id": "a", "values": [1, None, 3, 2, 5, 4, 3, 6, 2, 7, 3, 5], "missing": "pairwise"},
        {"id": "b", "values": [1, 2, 3, 1, 5, 4, 3, 6, 2, 7, 3, 5], "transform": {"difference": 1}},
        {"id": "c", "values": [1, None, 3, 4]},
        {"id": "d", "values": [1, 2, 3, 4, 5], "transform": {"log": True, "box_cox": 1}},
    ]
    body = client.post("/v1/diagnostics/batch", json={"series": series}).get_json()
    results = [r if "error" in r else merged(r, body.get("shared", {})) for r in body["results"]]
    assert results[0]["missing"]["method"] == "pairwise" and results[0]["missing"]["effective_n"] is not None
    assert results[1]["transform"]["steps"][0]["step"] == "difference" and results[1]["n"] == 11
    assert results[2]["error"]["errors"][0]["pointer"] == "/series/2/values/1"
    assert results[3]["error"]["errors"][0]["pointer"] == "/series/3/transform/box_cox"
    single = client.post(URL, json={k: v for k, v in series[0].items() if k != "id"}).get_json()
    assert single["acf"] == results[0]["acf"] and single["tests"] == results[0]["tests"]


@pytest.mark.parametrize("values", [[], [float("nan")], [2.0], [2.0, float("nan"), 2.0]])
def test_box_cox_estimate_needs_two_distinct_observed_values(values):
    """Too few observed values (or all equal) to estimate lambda: a 422 pointing at box_cox, not a crash."""
    from lagsight.problems import Problem

    with pytest.raises(Problem) as caught:
        transforms.apply(np.array(values, dtype=np.float64), {"box_cox": "estimate"}, None)
    assert [e.pointer for e in caught.value.errors] == ["/transform/box_cox"]


def test_box_cox_with_an_extreme_estimated_lambda_is_refused_with_its_cause(client):
    """Values that vary little relative to their level (50 +- 1, 40 points, seeded) get a flat likelihood
    and an extreme estimated lambda (about -11.9); the transformed values then differ only at rounding
    level. The 422 points at box_cox and names the lambda, not just "constant"."""
    values = (50 + np.random.default_rng(5).standard_normal(40)).round(3).tolist()
    r = client.post(URL, json={"values": values, "transform": {"box_cox": "estimate"}})
    assert r.status_code == 422, r.get_json()
    error = r.get_json()["errors"][0]
    assert error["pointer"] == "/transform/box_cox"
    assert "lambda -11.85 (estimated)" in error["detail"] and "Send a lambda" in error["detail"]
    assert client.post(URL, json={"values": values, "transform": {"box_cox": 0}}).status_code == 200

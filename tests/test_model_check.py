"""POST /v1/model-check: the fit against statsmodels, the residuals' diagnosis, the search, and bad input."""
from __future__ import annotations

import warnings

import numpy as np
import pytest
from statsmodels.datasets import elnino, sunspots
from statsmodels.stats.diagnostic import acorr_ljungbox
from statsmodels.tsa.statespace.sarimax import SARIMAX
from threadpoolctl import threadpool_limits

from lagsight import create_app

from .spec_tools import assert_problem_at, assert_valid, spec

URL = "/v1/model-check"


@pytest.fixture(autouse=True)
def one_blas_thread():
    """Fit with one BLAS thread, as a gunicorn worker does (serving/gunicorn_conf.py): the Kalman filter's small
    matrix products run many times slower when BLAS threads compete for the cores of a busy machine."""
    with threadpool_limits(1):
        yield


def _direct(y, order, seasonal=(0, 0, 0, 0), trend="c"):
    """The reference: statsmodels' SARIMAX fitted directly with its defaults (its warnings silenced here)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return SARIMAX(y, order=order, seasonal_order=seasonal, trend=trend).fit(disp=False)


def _ar1(n: int, phi: float, seed: int) -> np.ndarray:
    """A seeded stationary AR(1) path (simulated data, not a reference)."""
    e = np.random.default_rng(seed).standard_normal(n + 100)
    x = np.zeros(n + 100)
    for t in range(1, n + 100):
        x[t] = phi * x[t - 1] + e[t]
    return x[100:]


def _post(client, body, status=200):
    r = client.post(URL, json=body)
    assert r.status_code == status, r.get_json()
    return r.get_json()


def _check_against(answer: dict, res, burn: int) -> None:
    """Every number of the fitted model equals statsmodels' direct fit of the same order.

    Reference: statsmodels.tsa.statespace.sarimax.SARIMAX(...).fit(disp=False) (params, bse, llf, aic, aicc,
    bic, nobs). The service makes the same call, so the tolerance (relative 1e-9) only allows for a different
    order of floating-point operations; the optimiser's own tolerance is far coarser.
    """
    model = answer["model"]
    assert [p["estimate"] for p in model["parameters"]] == pytest.approx(list(res.params), rel=1e-9)
    assert [p["standard_error"] for p in model["parameters"]] == pytest.approx(list(res.bse), rel=1e-9)
    for key, ref in (("log_likelihood", res.llf), ("aic", res.aic), ("aicc", res.aicc), ("bic", res.bic)):
        assert model[key] == pytest.approx(ref, rel=1e-9), key
    assert model["n_used"] == res.nobs and model["residuals_dropped"] == burn
    assert model["converged"] is True and model["notes"] == []


def test_ar2_on_sunspots_equals_a_direct_statsmodels_fit(client):
    # statsmodels.datasets.sunspots: yearly sunspot activity, 309 values (reference data, not a demo).
    y = sunspots.load_pandas().data["SUNACTIVITY"].to_numpy()
    answer = _post(client, {"values": y.tolist(), "order": [2, 0, 0]})
    res = _direct(y, (2, 0, 0))
    _check_against(answer, res, 0)
    assert [(p["term"], p["lag"]) for p in answer["model"]["parameters"]] == [
        ("constant", None), ("ar", 1), ("ar", 2), ("variance", None)]
    assert answer["model"]["label"] == "ARIMA(2,0,0)" and answer["model"]["trend"] == "constant"
    assert answer["model"]["chosen_by"] == "request" and answer["search"] is None
    assert_valid(answer, "ModelCheckResponse")


def test_seasonal_differenced_model_and_its_residuals_equal_statsmodels(client):
    # statsmodels.datasets.elnino: monthly sea surface temperatures; the first 20 years (240 months).
    y = elnino.load_pandas().data.iloc[:20, 1:].to_numpy().ravel()
    answer = _post(client, {"values": y.tolist(), "order": [1, 0, 0], "seasonal_order": [1, 1, 0, 12],
                            "period": 12})
    res = _direct(y, (1, 0, 0), (1, 1, 0, 12), trend="n")
    burn = max(res.loglikelihood_burn, res.filter_results.nobs_diffuse)
    assert burn == 12  # D s: the seasonal difference leaves the first year undetermined
    _check_against(answer, res, burn)
    resid = answer["residuals"]
    assert resid["n"] == 240 - 12 and resid["model_df"] == 2 == answer["model"]["arma_terms"]
    # Reference: statsmodels.stats.diagnostic.acorr_ljungbox on the standardised one-step forecast errors after
    # the burn-in (what MLEResults.test_serial_correlation examines), with model_df = p + P.
    errors = res.filter_results.standardized_forecasts_error[0][burn:]
    for t in (t for t in resid["tests"] if t["name"] == "ljung_box"):
        ref = acorr_ljungbox(errors, lags=[t["lag"]], model_df=2)
        assert t["statistic"] == pytest.approx(float(ref["lb_stat"].iloc[0]), rel=1e-9)
        assert t["p_value"] == pytest.approx(float(ref["lb_pvalue"].iloc[0]), rel=1e-7, abs=1e-300)
        assert t["df"] == t["lag"] - 2


def test_trend_names_map_to_the_statsmodels_trends(client):
    y = _ar1(150, 0.5, 11) + 0.02 * np.arange(150)
    answer = _post(client, {"values": y.tolist(), "order": [1, 0, 0], "trend": "constant_linear"})
    _check_against(answer, _direct(y, (1, 0, 0), trend="ct"), 0)
    assert [p["term"] for p in answer["model"]["parameters"]][:2] == ["constant", "linear_trend"]
    answer = _post(client, {"values": y.tolist(), "order": [0, 1, 1]})
    assert answer["model"]["trend"] == "none" and answer["model"]["residuals_dropped"] == 1
    _check_against(answer, _direct(y, (0, 1, 1), trend="n"), 1)


def test_suggested_order_for_an_ar1_and_the_search_record(client):
    answer = _post(client, {"values": _ar1(200, 0.6, 3).tolist(), "order": "suggested"})
    search = answer["search"]
    assert search["start"]["label"] == "ARIMA(1,0,0)"
    assert answer["model"]["chosen_by"] == "search" and answer["model"]["label"] == search["chosen"]
    tried = {t["label"]: t for t in search["tried"]}
    assert {"ARIMA(1,0,0)", "ARIMA(2,0,0)", "ARIMA(1,0,1)", "ARIMA(0,0,0)"} <= set(tried)
    eligible = [t for t in search["tried"] if t["converged"]]
    assert search["chosen"] == min(eligible, key=lambda t: t["aicc"])["label"]
    assert 1 <= search["fits"] == len(search["tried"]) <= search["max_fits"]
    assert search["work"] <= search["work_budget"] and search["stopped"] in ("no_improvement", "fit_limit", "budget")
    assert_valid(answer, "ModelCheckResponse")


def test_suggested_order_for_an_ma1_and_a_seasonal_ar(client):
    e = np.random.default_rng(8).standard_normal(301)
    ma1 = e[1:] + 0.6 * e[:-1]
    answer = _post(client, {"values": ma1.tolist(), "order": "suggested"})
    assert answer["search"]["start"]["label"] == "ARIMA(0,0,1)"
    e = np.random.default_rng(9).standard_normal(400)
    sar = np.zeros(400)
    for t in range(4, 400):
        sar[t] = 0.5 * sar[t - 4] + e[t]
    answer = _post(client, {"values": sar[100:].tolist(), "order": "suggested", "period": 4})
    assert answer["search"]["start"]["seasonal_order"] == [1, 0, 0, 4]
    assert answer["model"]["seasonal_order"] is not None and answer["residuals"]["model_df"] >= 1


def test_the_comparison_says_whether_the_model_took_the_structure_out(client):
    y = _ar1(250, 0.7, 21).tolist()
    good = _post(client, {"values": y, "order": [1, 0, 0]})["comparison"]
    assert good["before"]["white_noise"] is False and good["after"]["white_noise"] is True
    assert good["structure_removed"] is True and "took the structure out" in good["sentence"]
    assert good["before"]["largest_spike"]["lag"] == 1 and good["before"]["ljung_box"]["p_value"] < 1e-6
    assert "not proof" in good["sentence"]
    bad = _post(client, {"values": y, "order": [0, 0, 0]})["comparison"]
    assert bad["after"]["white_noise"] is False and bad["structure_removed"] is False
    assert bad["sentence"].startswith("Structure remains after ARIMA(0,0,0)")
    noise = np.random.default_rng(5).standard_normal(200).tolist()
    none = _post(client, {"values": noise, "order": [0, 0, 0]})["comparison"]
    if none["before"]["white_noise"] and none["after"]["white_noise"]:
        assert none["structure_removed"] is None and "no structure to take out" in none["sentence"]


def test_residuals_keep_the_timestamps_and_missing_values(client):
    stamps = [f"{2010 + i // 12}-{i % 12 + 1:02d}-01" for i in range(120)]
    y = _ar1(120, 0.5, 4) + np.tile(np.cos(np.arange(12) * np.pi / 6), 10)
    answer = _post(client, {"values": y.tolist(), "timestamps": stamps, "order": [1, 0, 0],
                            "seasonal_order": [0, 1, 1, 12]})
    resid = answer["residuals"]
    assert resid["period"] == 12 and resid["seasonal"]["period_source"] == "timestamps"
    assert resid["charts"]["time_plot"]["x"][0] == "2011-01-01"  # the first year is the burn-in
    values = y.tolist()
    values[30] = values[31] = None
    answer = _post(client, {"values": values, "order": [1, 0, 0], "missing": "pairwise"})
    assert answer["residuals"]["n"] == 118 == answer["model"]["n_used"]
    assert answer["residuals"]["missing"]["method"] == "pairwise"


def _series(n=60, seed=2):
    return _ar1(n, 0.5, seed).tolist()


BAD = [
    ({"values": _series(), "order": [1, 0]}, "/order", "3 integers"),
    ({"values": _series(), "order": [6, 0, 0]}, "/order/0", "between 0 and 5"),
    ({"values": _series(), "order": [1, True, 0]}, "/order/1", "integer"),
    ({"values": _series(), "order": "auto"}, "/order", "suggested"),
    ({"values": _series()}, "/order", "required"),
    ({"values": _series(), "order": "suggested", "seasonal_order": [1, 0, 0, 12]}, "/seasonal_order", "explicit"),
    ({"values": _series(), "order": "suggested", "trend": "none"}, "/trend", "explicit"),
    ({"values": _series(), "order": [1, 0, 0], "model_df": 1}, "/model_df", "unknown"),
    ({"values": _series(), "order": [1, 0, 0], "seasonal_order": [1, 0, 0, 1]}, "/seasonal_order/3", "at least 2"),
    ({"values": _series(), "order": [4, 0, 0], "seasonal_order": [1, 0, 0, 4]}, "/order", "less than the seasonal"),
    ({"values": _series(), "order": [0, 0, 4], "seasonal_order": [0, 0, 1, 4]}, "/order", "less than the seasonal"),
    ({"values": _series(), "order": [1, 0, 0], "seasonal_order": [1, 0, 0, 60]}, "/seasonal_order/3", "less than"),
    ({"values": _series(), "order": [1, 0, 0], "trend": "quadratic"}, "/trend", "one of"),
    ({"values": _series(8), "order": [2, 0, 2]}, "/order", "at least"),
    ({"values": _series(3000), "order": [2, 0, 2], "seasonal_order": [2, 1, 2, 52]}, "/order", "budget"),
    ({"values": [1.0, None, 2.0, 3.0], "order": [1, 0, 0]}, "/values/1", "missing"),
    ({"values": _series(), "order": [1, 0, 0], "max_lag": 60}, "/max_lag", "less than"),
]


@pytest.mark.parametrize("body,pointer,phrase", BAD)
def test_bad_input_is_422_with_a_pointer(client, body, pointer, phrase):
    assert_problem_at(client.post(URL, json=body), pointer, phrase)


def test_a_fit_that_does_not_converge_is_422_at_the_order(client):
    y = np.random.default_rng(1).standard_normal(12).tolist()
    r = client.post(URL, json={"values": y, "order": [2, 0, 2], "trend": "constant_linear"})
    res = _direct(np.array(y), (2, 0, 2), trend="ct")
    assert res.mle_retvals["converged"] is False  # statsmodels' own fit stops at its iteration limit too
    assert r.status_code == 422
    assert r.get_json()["errors"][0]["pointer"] == "/order" and "did not converge" in r.get_json()["detail"]


def test_http_errors_and_auth(client):
    assert client.post(URL, data=b"{", content_type="application/json").status_code == 400
    assert client.post(URL, data=b"1,2,3", content_type="text/csv").status_code == 415
    r = client.post(URL, json={"values": _series(), "order": [1, 0, 0]}, headers={"Accept": "text/csv"})
    assert r.status_code == 406 and r.mimetype == "application/problem+json"
    assert client.get(URL).status_code == 405
    guarded = create_app({"TESTING": True, "AUTH_TOKENS": ("s3cret",)}).test_client()
    body = {"values": _series(), "order": [1, 0, 0]}
    assert guarded.post(URL, json=body).status_code == 401
    assert guarded.post(URL, json=body, headers={"Authorization": "Bearer s3cret"}).status_code == 200


def _counter(client, name: str) -> float:
    for line in client.get("/metrics").get_data(as_text=True).splitlines():
        if line.startswith(name + " "):
            return float(line.split()[1])
    return 0.0


def test_metrics_count_the_request_the_fits_and_both_series(client):
    fits, series = _counter(client, "lagsight_models_fitted_total"), _counter(client, "lagsight_series_analysed_total")
    _post(client, {"values": _ar1(120, 0.6, 7).tolist(), "order": "suggested"})
    answer = _post(client, {"values": _ar1(120, 0.6, 7).tolist(), "order": "suggested"})
    assert _counter(client, "lagsight_models_fitted_total") - fits == 2 * answer["search"]["fits"]
    assert _counter(client, "lagsight_series_analysed_total") - series == 4
    text = client.get("/metrics").get_data(as_text=True)
    assert 'route="/v1/model-check"' in text


@pytest.mark.parametrize("name", ["explicit", "suggested"])
def test_the_openapi_examples_are_answered(client, name):
    example = spec()["paths"][URL]["post"]["requestBody"]["content"]["application/json"]["examples"][name]["value"]
    assert_valid(_post(client, example), "ModelCheckResponse")


@pytest.mark.parametrize("values", [[], [1.5]])
def test_no_values_or_one_is_a_422_before_any_fit(client, values):
    """Found by the schema fuzzing: an empty series once reached the cost estimate (log10 of 0) and answered 500."""
    r = client.post(URL, json={"order": [0, 0, 0], "values": values})
    assert r.status_code == 422 and r.content_type == "application/problem+json"
    assert r.get_json()["errors"][0]["pointer"].startswith("/values")

"""HTTP behaviour: status codes, the problem+json shape, and the report's content."""
from __future__ import annotations

import numpy as np
import pytest

from lagsight import create_app

from .load_tools import assert_direct_load_agrees
from .spec_tools import assert_valid

URL = "/v1/diagnostics"


def test_factory_applies_config_overrides():
    app = create_app({"MAX_LAG": 7, "TESTING": True})
    assert app.config["MAX_LAG"] == 7 and app.testing


def test_healthz(client):
    r = client.get("/healthz")
    assert r.status_code == 200 and r.get_json()["status"] == "ok"


def test_report_for_nist_numacc1_has_certified_lag1(client):
    # NIST StRD NumAcc1: certified lag-1 autocorrelation -0.5 with only three values.
    r = client.post(URL, json={"values": [10000001, 10000003, 10000002]})
    assert r.status_code == 200
    body = r.get_json()
    assert body["n"] == 3 and body["max_lag"] == 2
    assert body["acf"]["values"][0] == pytest.approx(-0.5, abs=1e-15)


def test_report_shape_and_values(client):
    x = np.random.default_rng(7).standard_normal(120)
    r = client.post(URL, json={"values": x.tolist(), "period": 12, "name": "north depot", "confidence": 0.9})
    body = r.get_json()
    assert r.status_code == 200 and r.mimetype == "application/json"
    assert body["name"] == "north depot" and body["confidence"] == 0.9 and body["period"] == 12
    assert body["max_lag"] == 24  # max(floor(10 log10 120) = 20, 2 * 12)
    assert [t["lag"] for t in body["tests"] if t["name"] == "ljung_box"] == [12, 24]
    assert [e["lag"] for e in body["seasonal"]["lags"]] == [12, 24]
    acf = body["acf"]
    assert acf["lags"] == list(range(1, 25))
    half = 1.6448536269514722 / np.sqrt(120)  # two-sided 90% normal quantile / sqrt(n)
    assert acf["upper"][0] == pytest.approx(half) and acf["lower"][3] == pytest.approx(-half)
    assert acf["outside"] == [k for k, v in zip(acf["lags"], acf["values"]) if abs(v) > half]
    assert body["verdict"]["white_noise"] in (True, False)
    assert body["cautions"] and body["interpretation"][0] == body["verdict"]["summary"]


def test_strong_autocorrelation_is_not_white_noise(client):
    rng = np.random.default_rng(3)
    e = rng.standard_normal(300)
    x = np.empty(300)
    x[0] = e[0]
    for t in range(1, 300):
        x[t] = 0.7 * x[t - 1] + e[t]
    body = client.post(URL, json={"values": x.tolist()}).get_json()
    assert body["verdict"]["white_noise"] is False
    assert 1 in body["acf"]["outside"] and 1 in body["pacf"]["outside"]


def test_model_df_leaves_no_degrees_of_freedom_reports_null_with_reason(client):
    body = client.post(URL, json={"values": list(np.sin(np.arange(30.0)) + np.arange(30) % 3), "max_lag": 4,
                                  "model_df": 4}).get_json()
    portmanteau = [t for t in body["tests"] if t["name"] in ("ljung_box", "box_pierce")]
    assert portmanteau
    for t in portmanteau:
        assert t["df"] is None and t["p_value"] is None and t["reject"] is None and "model_df" in t["note"]
    assert body["verdict"]["white_noise"] is not True  # no portmanteau family: never "white noise"


def _problem(r, status):
    assert r.status_code == status
    assert r.mimetype == "application/problem+json"
    body = r.get_json()
    assert_valid(body, "Problem")
    assert body["status"] == status and body["type"].startswith("urn:lagsight:problem:")
    return body


BAD_BODIES = [
    ({"values": [1, 2]}, "/values", "at least 3"),
    ({"values": [4, 4, 4, 4]}, "/values", "constant"),
    ({"values": [1, 2, 3, 4], "max_lag": 4}, "/max_lag", "less than"),
    ({"values": [1, 2, "3", 4]}, "/values/2", "number"),
    ({"values": [1, 2, True, 4]}, "/values/2", "boolean"),
    ({"values": [1, 2, 3], "unknown": 1}, "/unknown", "Unknown"),
    ({"values": "1,2,3"}, "/values", "array"),
    ({}, "/values", "required"),
    ({"values": [1, 2, 3], "confidence": 1}, "/confidence", ""),
    ({"values": [1, 2, 3], "confidence": "0.9"}, "/confidence", "number"),
    ({"values": [1, 2, 3], "period": 1}, "/period", ""),
    ({"values": [1, 2, 3, 5], "period": 4}, "/period", "less than"),
    ({"values": [1, 2, 3], "model_df": -1}, "/model_df", ""),
    ({"values": [1, 2, 3], "max_lag": 1.5}, "/max_lag", "integer"),
    ({"values": [1, 2, 3], "max_lag": 0}, "/max_lag", ""),
    ({"values": [1, None, 3, 4]}, "/values/1", "missing"),
    ({"values": [1, 2, 3], "timestamps": ["2024-01-01"]}, "/timestamps", "same length"),
    ({"values": [1, 2, 3], "timestamps": ["2024-01-01", "2024-01-02", "yesterday"]}, "/timestamps/2", "ISO 8601"),
    ({"values": [1, 2, 3], "timestamps": ["2024-01-01", "2024-01-01", "2024-01-03"]}, "/timestamps/1", "repeats"),
    ({"values": [1, 2, 3], "name": 5}, "/name", ""),
]


@pytest.mark.parametrize("body,pointer,phrase", BAD_BODIES)
def test_invalid_content_is_422_with_pointer(client, body, pointer, phrase):
    problem = _problem(client.post(URL, json=body), 422)
    pointers = [e["pointer"] for e in problem["errors"]]
    assert pointer in pointers
    detail = next(e["detail"] for e in problem["errors"] if e["pointer"] == pointer)
    assert phrase.lower() in detail.lower()


@pytest.mark.parametrize("raw,pointer", [
    (b'{"values": [1, 2, NaN, 4]}', "/values/2"),
    (b'{"values": [1, Infinity, 3]}', "/values/1"),
    (b'{"values": [1, -Infinity, 3]}', "/values/1"),
    (b'{"values": [1, 2, 1e400]}', "/values/2"),
    (b'{"values": [1, 2, 3], "confidence": 1e999}', "/confidence"),
])
def test_non_finite_numbers_are_422_with_pointer(client, raw, pointer):
    problem = _problem(client.post(URL, data=raw, content_type="application/json"), 422)
    assert pointer in [e["pointer"] for e in problem["errors"]]


@pytest.mark.parametrize("raw", [b"", b"   ", b"{", b'{"values": [1, 2,]}', b"\xff\xfe", b"[" * 100000])
def test_malformed_json_is_400(client, raw):
    _problem(client.post(URL, data=raw, content_type="application/json"), 400)


def test_non_object_body_is_422(client):
    problem = _problem(client.post(URL, data=b"[1, 2, 3]", content_type="application/json"), 422)
    assert problem["errors"][0]["pointer"] == ""


@pytest.mark.parametrize("ctype", ["text/plain", "application/x-www-form-urlencoded", None])
def test_wrong_media_type_is_415(client, ctype):
    kwargs = {"content_type": ctype} if ctype else {}
    _problem(client.post(URL, data=b'{"values": [1, 2, 3]}', **kwargs), 415)


def test_too_large_is_413():
    client = create_app({"MAX_BODY_BYTES": 1000, "TESTING": True}).test_client()
    _problem(client.post(URL, json={"values": list(range(1000))}), 413)


def test_too_many_points_is_422():
    client = create_app({"MAX_POINTS": 10, "TESTING": True}).test_client()
    problem = _problem(client.post(URL, json={"values": list(range(11))}), 422)
    assert problem["errors"][0]["pointer"] == "/values"


def test_max_lag_limit_is_enforced():
    client = create_app({"MAX_LAG": 5, "TESTING": True}).test_client()
    _problem(client.post(URL, json={"values": list(np.arange(30.0) % 7), "max_lag": 6}), 422)
    assert client.post(URL, json={"values": list(np.arange(30.0) % 7)}).get_json()["max_lag"] == 5


def test_not_found_and_method_not_allowed(client):
    _problem(client.get("/v2/nothing"), 404)
    r = client.delete(URL)
    _problem(r, 405)
    assert "POST" in r.headers["Allow"] and "GET" in r.headers["Allow"]


def test_crash_answers_in_problem_shape_without_trace(app, monkeypatch, caplog):
    import lagsight.web.diagnostics as view

    def boom(*a, **k):
        raise RuntimeError("secret internal detail")

    monkeypatch.setattr(view, "single_answer", boom)
    r = app.test_client().post(URL, json={"values": [1, 2, 3, 5]})
    body = _problem(r, 500)
    assert "secret" not in r.get_data(as_text=True) and "Traceback" not in r.get_data(as_text=True)
    assert body["type"].endswith("internal-error")
    assert any("unhandled error" in rec.message for rec in caplog.records)


def test_timestamps_imply_period(client):
    stamps = [f"{2020 + i // 12}-{i % 12 + 1:02d}-01" for i in range(48)]
    x = np.random.default_rng(1).standard_normal(48).tolist()
    body = client.post(URL, json={"values": x, "timestamps": stamps}).get_json()
    assert body["period"] == 12 and body["frequency"] == "monthly"
    assert body["seasonal"]["period_source"] == "timestamps"


DIRECT_BODIES = [
    {"values": [1, 2.5, 3, 4]},
    {"values": [1.5, 2, 3, 4, 0.25], "period": 2, "name": "kiosk", "max_lag": None, "seed": None},
    {"values": [1, 2, 3, 4], "name": None, "period": None, "max_lag": 2, "confidence": 0.9, "model_df": 1,
     "band": "bartlett", "p_values": "monte_carlo", "replicates": 199, "seed": 5, "missing": "pairwise"},
    {"values": [1, None, 3, 4], "missing": "interpolate", "transform": {"log": True, "difference": 1}},
    {"values": [1, 2, 3, 4], "transform": None},
    {"values": [1, 2, 3], "timestamps": ["2024-01-01", "2024-01-02", "2024-01-03"]},
]
SCHEMA_ONLY_BODIES = [
    {"values": [1, 2, 3], "timestamps": ["2024-01-01", "2024-01-02"]},  # the schema-level length rule
    {"values": [1, 2, 3], "timestamps": ["2024-01-01", None, "2024-01-03"]},
    {"values": [1, 2, 3], "timestamps": ["2024-01-01", "2024-01-02", "2" * 65]},
    {"values": [1, 2, 3], "tests": ["runs", "runs"]},
    {"values": [1, 2, 3], "colour": "red"},
    {"values": [1, 2, "3"]},
    {"values": [1, 2, float("inf")]},
    {"values": [1, None, float("nan")]},
    {"values": [1, 2, 3], "period": 1, "band": "wide"},
    {"values": [1, 2, 3], "transform": {"log": "yes"}},
    {"values": [1, 2, 3], "transform": {"sqrt": True}},
    {"values": None},
    {"period": 12},
]


@pytest.mark.parametrize("body", DIRECT_BODIES + SCHEMA_ONLY_BODIES)
def test_direct_load_agrees_with_the_schema(body):
    from lagsight.inputs.schema import (
        DIRECT_CHECKS,
        DIRECT_FIELDS,
        DiagnosticsRequest,
        DirectLoad,
    )

    schema = DiagnosticsRequest()
    assert_direct_load_agrees(schema, DirectLoad(schema, DIRECT_FIELDS, DIRECT_CHECKS), body, body in DIRECT_BODIES)


def test_direct_load_refuses_names_that_are_not_fields():
    from lagsight.inputs.schema import DiagnosticsRequest, DirectLoad

    with pytest.raises(ValueError, match="colour"):
        DirectLoad(DiagnosticsRequest(), ("values", "colour"))


def test_period_too_long_to_decompose_reports_strength_as_not_computed(client):
    """Period 1,049 needs an STL trend window of 2,003 values, above the 2,001 decomposed: the strength is
    null with the reason (the seasonal lags are still checked); 1,048 is decomposed."""
    n = 2 * 1049 + 50
    values = (3 * np.sin(2 * np.pi * np.arange(n) / 1049) + np.random.default_rng(4).standard_normal(n)).tolist()
    body = client.post(URL, json={"values": values, "period": 1049, "max_lag": 1060}).get_json()
    strength = body["seasonal"]["strength"]
    assert strength["value"] is None and "2003" in strength["note"] and "2001" in strength["note"]
    assert body["seasonal"]["lags"][0]["lag"] == 1049 and body["seasonal"]["lags"][0]["outside"]
    done = client.post(URL, json={"values": values, "period": 1048, "max_lag": 1060}).get_json()
    assert done["seasonal"]["strength"]["value"] is not None

"""POST /v1/stability: windows, their numbers against references, the change reading, and bad input."""
from __future__ import annotations

import io
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from PIL import Image
from statsmodels.stats.diagnostic import acorr_ljungbox
from statsmodels.tsa.stattools import acf as sm_acf

from lagsight import create_app
from lagsight.engine.changepoints import cusum_test, segment
from lagsight.inputs.stability import window_starts

from .spec_tools import assert_problem_at, assert_valid, spec

URL = "/v1/stability"


def _switch(n: int = 600, at: int = 300, phi: float = 0.6, seed: int = 3) -> np.ndarray:
    """Seeded white noise that turns into AR(1) at ``at`` (simulated, not a reference)."""
    e = np.random.default_rng(seed).standard_normal(n)
    x = np.zeros(n)
    for t in range(n):
        x[t] = (phi * x[t - 1] if t >= at else 0.0) + e[t]
    return x


def _post(client, body, status=200):
    r = client.post(URL, json=body)
    assert r.status_code == status, r.get_json()
    return r.get_json()


def test_window_starts_cover_the_series_and_end_at_the_last_value():
    assert window_starts(100, 40, 20) == [0, 20, 40, 60]
    assert window_starts(105, 40, 20) == [0, 20, 40, 60, 65]
    assert window_starts(40, 40, 7) == [0]


def test_each_window_is_diagnosed_as_the_single_route_would_and_matches_references(client):
    x = _switch(300, 150, seed=5)
    answer = _post(client, {"values": x.tolist(), "window": 60, "step": 30})
    assert_valid(answer, "StabilityResponse")
    assert [(w["start"], w["end"]) for w in answer["windows"]] == [(s, s + 60) for s in range(0, 241, 30)]
    for w in answer["windows"]:
        piece = x[w["start"]:w["end"]]
        single = client.post("/v1/diagnostics", json={"values": piece.tolist()}).get_json()
        assert w["white_noise"] is single["verdict"]["white_noise"] and w["summary"] == single["verdict"]["summary"]
        # References: statsmodels.tsa.stattools.acf (lag 1, demeaned, biased), statsmodels.stats.diagnostic.
        # acorr_ljungbox (at the window's largest reported lag) and numpy.var with ddof=1.
        assert w["lag1_autocorrelation"] == pytest.approx(sm_acf(piece, nlags=1)[1], rel=1e-10)
        ref = acorr_ljungbox(piece, lags=[w["ljung_box_lag"]])
        assert w["ljung_box_p"] == pytest.approx(float(ref["lb_pvalue"].iloc[0]), rel=1e-8)
        assert w["variance"] == pytest.approx(np.var(piece, ddof=1), rel=1e-12)
    counts = answer["counts"]
    assert counts["windows"] == 9 == counts["white_noise"] + counts["not_white_noise"] + counts["undetermined"]
    assert answer["step"] == 30 and answer["window"] == 60 and answer["n"] == 300


def test_a_switch_to_ar1_is_found_and_placed_with_its_timestamp(client):
    stamps = [f"2024-{1 + d // 28:02d}-{1 + d % 28:02d}T{h:02d}:00:00" for d in range(25) for h in range(24)]
    answer = _post(client, {"values": _switch().tolist(), "timestamps": stamps, "window": 40, "step": 20})
    changes = answer["changes"]
    assert changes["blocks"] == 15 and changes["block"] == 40 and changes["left_out"] == 0
    structure = [c for c in changes["found"] if c["kind"] == "structure"]
    assert structure and abs(structure[0]["index"] - 300) <= 40
    assert structure[0]["time"] == stamps[structure[0]["index"]]
    assert structure[0]["before"] < 0.2 < 0.4 < structure[0]["after"]
    assert any("structure changed near " + structure[0]["time"] in s for s in answer["reading"])
    chart = answer["chart"]
    assert chart["x_kind"] == "time" and chart["x"][0] == stamps[39]
    assert {"kind": "structure", "x": structure[0]["time"]} in chart["changes"]
    assert chart["upper"] == pytest.approx(1.959963984540054 / np.sqrt(40)) == -chart["lower"]
    late = [w["white_noise"] for w in answer["windows"] if w["start"] >= 320]
    early = [w["white_noise"] for w in answer["windows"] if w["end"] <= 300]
    # One seeded series: 40 values of AR(1) 0.6 are judged not white in most windows, not all (the verdict's power
    # at that length is well below 1), and pure-noise windows rarely.
    assert late.count(False) >= 0.6 * len(late) and early.count(False) <= 0.3 * len(early)


def test_white_noise_shows_no_change_and_short_series_get_no_change_reading(client):
    x = np.random.default_rng(11).standard_normal(400)
    answer = _post(client, {"values": x.tolist(), "window": 50})
    assert answer["changes"]["found"] == [] and answer["step"] == 25
    assert any(s.startswith("No change in the lag-1 autocorrelation or the variance") for s in answer["reading"])
    short = _post(client, {"values": x[:200].tolist(), "window": 50})
    assert short["changes"]["found"] is None and "at least 6 blocks" in short["changes"]["note"]
    assert_valid(short, "StabilityResponse")


def test_a_constant_window_gets_its_own_error_and_the_others_are_answered(client):
    x = np.random.default_rng(2).standard_normal(200)
    x[100:140] = 4.0  # a stuck sensor
    answer = _post(client, {"values": x.tolist(), "window": 40, "step": 20})
    stuck = [w for w in answer["windows"] if w["start"] == 100][0]
    assert "constant" in stuck["error"] and stuck["white_noise"] is None and stuck["variance"] == 0.0
    assert answer["counts"]["errors"] == 1 and answer["counts"]["windows"] == 9
    assert_valid(answer, "StabilityResponse")


def test_missing_values_interpolated_or_pairwise(client):
    values = _switch(300, 150).tolist()
    values[10] = values[11] = None
    answer = _post(client, {"values": values, "window": 50, "missing": "pairwise"})
    first = answer["windows"][0]
    assert first["n"] == 48 and first["error"] is None
    assert _post(client, {"values": values, "window": 50, "missing": "interpolate"})["windows"][0]["n"] == 50


BAD = [
    ({"values": list(range(30)), "window": 40}, "/window", "at most the number of values"),
    ({"values": list(range(30)), "window": 10}, "/window", "greater than or equal to 20"),
    ({"values": list(range(100)), "window": 40, "step": 50}, "/step", "at most the window"),
    ({"values": list(range(100)), "window": 40, "step": 0}, "/step", ""),
    ({"values": list(range(100)), "window": 40, "max_lag": 40}, "/max_lag", "less than the window"),
    ({"values": list(range(5000)), "window": 20, "step": 1}, "/step", "raise step to at least"),
    ({"values": list(range(100))}, "/window", "required"),
    ({"values": list(range(100)), "window": 40, "windows": 3}, "/windows", "unknown"),
    ({"values": [1, None, 3] * 20, "window": 20}, "/values/1", "missing"),
]


@pytest.mark.parametrize("body,pointer,phrase", BAD)
def test_bad_input_is_422_with_a_pointer(client, body, pointer, phrase):
    assert_problem_at(client.post(URL, json=body), pointer, phrase)


def test_http_errors_auth_metrics_and_the_openapi_example(client):
    assert client.post(URL, data=b"[", content_type="application/json").status_code == 400
    assert client.post(URL, data=b"1,2", content_type="text/csv").status_code == 415
    assert client.post(URL, json={"values": [1, 2]}, headers={"Accept": "text/html"}).status_code == 406
    guarded = create_app({"TESTING": True, "AUTH_TOKENS": ("s3cret",)}).test_client()
    body = {"values": np.random.default_rng(1).standard_normal(80).tolist(), "window": 40}
    assert guarded.post(URL, json=body).status_code == 401
    assert guarded.post(URL, json=body, headers={"Authorization": "Bearer s3cret"}).status_code == 200
    example = spec()["paths"][URL]["post"]["requestBody"]["content"]["application/json"]["example"]

    def analysed():
        text = client.get("/metrics").get_data(as_text=True)
        return float(next(line.split()[1] for line in text.splitlines()
                          if line.startswith("lagsight_series_analysed_total ")))

    before = analysed()
    answer = _post(client, example)
    assert_valid(answer, "StabilityResponse")
    assert analysed() - before == answer["counts"]["windows"] == 3


def test_permutation_cusum_finds_a_plain_mean_shift():
    """For 6 zeros then 6 ones the CUSUM peaks after block 6, and only the 2 of the C(12, 6) = 924 orderings that
    put all ones on one side reach it (a count, common practice for permutation tests, no source): p near 0.002."""
    a = np.array([0.0] * 6 + [1.0] * 6)
    stat, k, p = cusum_test(a, np.random.default_rng(0))
    assert k == 6 and stat == pytest.approx(3.0) and p < 0.02
    changes = segment(np.r_[np.zeros(10), np.ones(8), 3 * np.ones(10)], 0.05, "lag1_autocorrelation")
    assert [(c.boundary, c.rank) for c in changes] == [(10, 2), (18, 1)]  # the larger step is found first
    assert segment(np.random.default_rng(4).standard_normal(12), 0.05, "log_variance") == []


def test_the_answer_as_an_image(client):
    body = {"values": _switch(400, 200).tolist(), "window": 40, "step": 20, "name": "line 7"}
    svg = client.post(URL, json=body, query_string={"format": "svg"})
    assert svg.status_code == 200 and svg.mimetype == "image/svg+xml"
    assert ET.fromstring(svg.data).tag == "{http://www.w3.org/2000/svg}svg"
    png = client.post(URL, json=body, headers={"Accept": "image/png"})
    assert png.status_code == 200 and png.mimetype == "image/png"
    image = Image.open(io.BytesIO(png.data))
    assert image.format == "PNG" and image.size[0] > 600
    colours = {c for _, c in image.convert("RGB").getcolors(1 << 20)}
    assert (0xB3, 0x26, 0x1E) in colours  # windows judged not white noise, in the "far" colour of the style
    bad = client.post(URL, json=body, query_string={"format": "gif"})
    assert bad.status_code == 422 and bad.get_json()["errors"][0]["pointer"] == "/format"
    assert client.post(URL, json=body, query_string={"chart": "panel"}).get_json()["errors"][0]["pointer"] == "/chart"
    assert client.post(URL, json=body, headers={"Accept": "text/csv"}).status_code == 406

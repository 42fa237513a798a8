"""Outputs: the CSV table read back by pandas, the charts block, Vega-Lite specs, SVG and PNG images."""
from __future__ import annotations

import io
import json
import xml.etree.ElementTree as ET
from functools import lru_cache
from pathlib import Path

import jsonschema
import numpy as np
import pandas as pd
import pytest
from PIL import Image

from lagsight.outputs import charts, style

from .spec_tools import assert_valid

URL = "/v1/diagnostics"


def _seasonal_body(n: int = 144, seed: int = 4) -> dict:
    """Invented monthly residuals with a seasonal lag-12 echo and short-term memory (seeded)."""
    rng = np.random.default_rng(seed)
    e = rng.standard_normal(n + 12)
    x = np.empty(n)
    for t in range(n):
        x[t] = 0.5 * (x[t - 1] if t else 0.0) + e[t + 12] + 0.6 * e[t]
    stamps = [d.date().isoformat() for d in pd.date_range("2012-01-01", periods=n, freq="MS")]
    return {"name": "orchard co-op monthly residuals", "values": x.round(5).tolist(), "timestamps": stamps}


def test_csv_output_reads_back_with_pandas_and_matches_the_json(client):
    body = _seasonal_body()
    report = client.post(URL, json=body).get_json()
    for kwargs in ({"headers": {"Accept": "text/csv"}}, {"query_string": {"format": "csv"}}):
        r = client.post(URL, json=body, **kwargs)
        assert r.status_code == 200 and r.mimetype == "text/csv"
        assert r.data.count(b"\r\n") == report["max_lag"] + 1
        table = pd.read_csv(io.BytesIO(r.data))
        assert list(table.columns) == ["lag", "acf", "pacf", "lower", "upper", "outside", "seasonal", "pacf_lower",
                                       "pacf_upper", "pacf_outside"]
        assert table["lag"].tolist() == report["acf"]["lags"]
        np.testing.assert_array_equal(table["acf"].to_numpy(), report["acf"]["values"])  # repr round-trips floats
        np.testing.assert_array_equal(table["pacf"].to_numpy(), report["pacf"]["values"])
        np.testing.assert_array_equal(table["upper"].to_numpy(), report["acf"]["upper"])
        assert table["outside"].dtype == bool and table["seasonal"].dtype == bool
        assert table.loc[table["outside"], "lag"].tolist() == report["acf"]["outside"]
        assert table.loc[table["pacf_outside"], "lag"].tolist() == report["pacf"]["outside"]
        assert table.loc[table["seasonal"], "lag"].tolist() == [12, 24]


def test_format_wins_over_accept_and_unknown_accept_is_406(client):
    body = {"values": [1, 3, 2, 5, 4, 6, 5, 8]}
    assert client.post(URL, json=body, query_string={"format": "json"}, headers={"Accept": "text/csv"}).is_json
    r = client.post(URL, json=body, headers={"Accept": "application/xml"})
    assert r.status_code == 406 and r.mimetype == "application/problem+json"
    assert client.post(URL, json=body, headers={"Accept": "text/csv;q=0.9, application/json"}).is_json
    r = client.post(URL, json=body, query_string={"format": "xlsx"})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/format"
    r = client.post(URL, json=body, query_string={"chart": "pie", "format": "svg"})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/chart"
    r = client.post(URL, json=body, query_string={"max_lag": 3})  # analysis options go in a JSON body
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/max_lag"
    bad = client.post(URL, json={"values": [1, 2]}, headers={"Accept": "image/png"})
    assert bad.status_code == 422 and bad.mimetype == "application/problem+json"


def test_charts_block_comes_when_asked_and_is_consistent(client):
    body = _seasonal_body()
    assert client.post(URL, json=body).get_json()["charts"] is None  # opt-in: acf, pacf and periodogram hold the numbers
    report = client.post(URL, json={**body, "charts": True}).get_json()
    assert_valid(report, "Report")
    c = report["charts"]
    assert c["time_plot"]["x"][0] == "2012-01-01" and c["time_plot"]["x_kind"] == "time"
    assert c["time_plot"]["values"] == body["values"] and not c["time_plot"]["thinned"]
    corr = c["correlogram"]
    assert corr["values"] == report["acf"]["values"] and corr["upper"] == report["acf"]["upper"]
    assert [lag for lag, s in zip(corr["lags"], corr["seasonal"]) if s] == [12, 24]
    # Zones are the report's own classification: far lags, other outside lags (marginal), the rest inside.
    expected = ["far" if lag in report["acf"]["far"] else "marginal" if lag in report["acf"]["outside"] else "inside"
                for lag in corr["lags"]]
    assert corr["zone"] == expected
    assert set(report["acf"]["marginal"]) == {lag for lag, z in zip(corr["lags"], corr["zone"]) if z == "marginal"}
    se = np.array(report["acf"]["standard_error"])  # far means beyond options.FAR_OUTSIDE_SE = 3 standard errors
    v = np.abs(np.array(corr["values"]) - np.array(report["acf"]["centre"]))
    assert all((vi > 3 * si) == (z == "far") for vi, si, z in zip(v, se, corr["zone"]))
    assert {"far", "inside"} <= set(corr["zone"])  # the seeded series has both
    assert all(chart["vega_lite"] is None for chart in c.values())


def test_long_series_time_plot_is_thinned_keeping_extremes():
    x = np.random.default_rng(8).standard_normal(50_000)
    x[31_337] = 25.0
    x[777] = -25.0
    block = charts.time_plot(x, None)
    assert block["thinned"] and len(block["values"]) <= charts.MAX_TIME_POINTS and block["points"] == 50_000
    assert 25.0 in block["values"] and -25.0 in block["values"]
    assert block["x"] == sorted(block["x"])


def test_periodogram_chart_says_why_it_is_empty_with_missing_values(client):
    body = _seasonal_body() | {"missing": "pairwise"}
    body["values"][50] = None
    block = client.post(URL, json=body | {"charts": True}).get_json()["charts"]["periodogram"]
    assert block["frequencies"] == [] and "missing=interpolate" in block["note"]
    filled = client.post(URL, json=body | {"missing": "interpolate", "charts": True}).get_json()
    block = filled["charts"]["periodogram"]
    assert block["frequencies"] == filled["periodogram"]["frequencies"] and block["note"] is None
    assert len(block["power"]) == len(block["cumulative"]) == len(block["frequencies"]) > 10


def test_zones_follow_the_report_far_and_marginal_lags(client):
    # se = 1/sqrt(100) = 0.1 under the white_noise band: outside beyond 0.196, "far" beyond 0.3.
    block = {"lags": [1, 2, 3, 4, 5], "values": [0.1, -0.2, 0.29, -0.31, None], "far": [4], "marginal": [2, 3]}
    assert charts.block_zones({**block, "outside": [2, 3, 4]}) == ["inside", "marginal", "marginal", "far", None]


def test_zones_use_the_band_centre_of_the_small_sample_band(client):
    x = np.random.default_rng(5).standard_normal(40).tolist()
    body = client.post("/v1/diagnostics", json={"values": x, "band": "small_sample", "charts": True}).get_json()
    acf, zone = body["acf"], body["charts"]["correlogram"]["zone"]
    for lag, value, centre, se, z in zip(acf["lags"], acf["values"], acf["centre"], acf["standard_error"], zone):
        outside = lag in acf["outside"]
        assert z == ("inside" if not outside else "far" if abs(value - centre) > 3 * se else "marginal")


@lru_cache(maxsize=1)
def _vega_lite_validator() -> jsonschema.Draft7Validator:
    """The Vega-Lite JSON schema shipped in the altair package (altair/vegalite/v6/schema/vega-lite-schema.json)."""
    import altair

    path = Path(altair.__file__).parent / "vegalite" / "v6" / "schema" / "vega-lite-schema.json"
    return jsonschema.Draft7Validator(json.loads(path.read_text()))


def test_vega_lite_specs_validate_against_the_vega_lite_schema(client):
    body = _seasonal_body() | {"missing": "pairwise"}
    body["values"][30] = None
    report = client.post(URL, json=body, query_string={"vega_lite": "true"}).get_json()
    assert_valid(report, "Report")
    validator = _vega_lite_validator()
    for name in ("time_plot", "correlogram", "pacf"):
        spec = report["charts"][name]["vega_lite"]
        errors = sorted(validator.iter_errors(spec), key=lambda e: list(e.path))
        assert not errors, (name, [(list(e.path), e.message[:200]) for e in errors[:3]])
        assert spec["$schema"].endswith("/vega-lite/v6.json")
    corr = report["charts"]["correlogram"]["vega_lite"]
    assert [row["value"] for row in corr["data"]["values"]] == report["acf"]["values"]
    assert corr["layer"][0]["mark"]["type"] == "area"  # the band is a shaded region
    assert corr["layer"][2]["encoding"]["color"]["scale"]["range"] == list(style.ZONE_COLOURS.values())
    assert report["charts"]["periodogram"]["vega_lite"] is None  # not computed with values missing
    filled = client.post(URL, json=body | {"missing": "interpolate"}, query_string={"vega_lite": "true"}).get_json()
    spec = filled["charts"]["periodogram"]["vega_lite"]
    errors = list(validator.iter_errors(spec))
    assert not errors, [(list(e.path), e.message[:200]) for e in errors[:3]]
    assert [row["power"] for row in spec["data"]["values"]] == filled["periodogram"]["power"]
    invalid = dict(corr, mark="spike")  # a structural check that the validator does reject bad specs
    assert list(validator.iter_errors(invalid))


def test_vega_lite_specs_compile_and_render(client):
    """Schema-valid is not enough: each specification must compile in Vega-Lite itself and render
    (vl-convert-python bundles the Vega-Lite compiler and renderer; no browser)."""
    import vl_convert

    body = _seasonal_body()
    report = client.post(URL, json=body, query_string={"vega_lite": "true"}).get_json()
    for name in ("time_plot", "correlogram", "pacf", "periodogram"):
        svg = vl_convert.vegalite_to_svg(report["charts"][name]["vega_lite"])
        root = ET.fromstring(svg)
        assert root.tag.endswith("svg"), name
        if name in ("correlogram", "pacf"):
            assert style.BAND_FILL.lower() in svg.lower()  # the band is drawn as a filled region


@pytest.mark.parametrize("chart", ["correlogram", "pacf", "time_plot", "periodogram", "panel"])
def test_svg_parses_as_xml(client, chart):
    r = client.post(URL, json=_seasonal_body(), query_string={"format": "svg", "chart": chart})
    assert r.status_code == 200 and r.mimetype == "image/svg+xml"
    root = ET.fromstring(r.data)
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert float(root.get("width").rstrip("pt")) > 300
    if chart in ("correlogram", "panel"):
        assert style.BAND_FILL.lower() in r.data.decode().lower()


def _pixels(png: bytes) -> tuple[Image.Image, set]:
    image = Image.open(io.BytesIO(png))
    image.load()
    colours = {"#%02x%02x%02x" % rgba[:3] for _, rgba in image.convert("RGBA").getcolors(1 << 20)}
    return image, colours


@pytest.mark.parametrize("chart", ["correlogram", "pacf", "time_plot", "periodogram", "panel"])
def test_png_decodes_with_pillow(client, chart):
    r = client.post(URL, json=_seasonal_body(), headers={"Accept": "image/png"}, query_string={"chart": chart})
    assert r.status_code == 200 and r.mimetype == "image/png"
    image, colours = _pixels(r.data)
    assert image.format == "PNG" and image.size[0] > 600 and image.size[1] > 300
    if chart in ("correlogram", "panel"):
        # The band, far-outside spikes (the seeded series has some) and the seasonal marker are drawn.
        for colour in (style.BAND_FILL, style.ZONE_COLOURS["far"], style.SEASONAL, style.ZONE_COLOURS["inside"]):
            assert colour.lower() in colours, colour


def test_get_renders_from_query_values(client):
    values = ",".join(f"{v:.3f}" for v in np.random.default_rng(1).standard_normal(40)) + ",,1.5"
    r = client.get(URL, query_string={"values": values, "format": "svg", "missing": "interpolate"})
    assert r.status_code == 200 and r.mimetype == "image/svg+xml"
    ET.fromstring(r.data)
    r = client.get(URL, query_string={"values": values, "missing": "pairwise", "max_lag": 5})
    assert r.status_code == 200 and r.get_json()["missing"]["count"] == 1
    bad = client.get(URL, query_string={"values": "1,2,x,4"})
    assert bad.status_code == 422 and bad.get_json()["errors"][0]["pointer"] == "/values/2"
    assert client.get(URL).status_code == 422

"""The consultation options over HTTP: bands, test selection, Monte Carlo p-values, and their limits."""
from __future__ import annotations

import re

import numpy as np
import pytest

from lagsight import create_app

from .spec_tools import assert_valid

URL = "/v1/diagnostics"
X = np.random.default_rng(99).standard_normal(60).tolist()


@pytest.mark.parametrize("band", ["white_noise", "small_sample", "bartlett", "simultaneous"])
def test_every_band_kind_answers_in_the_report_shape(client, band):
    body = client.post(URL, json={"values": X, "band": band}).get_json()
    assert_valid(body, "Report")
    assert body["band"]["kind"] == band
    acf = body["acf"]
    for v, lo, hi, lag in zip(acf["values"], acf["lower"], acf["upper"], acf["lags"]):
        assert (lag in acf["outside"]) == (v < lo or v > hi)
    if band == "small_sample":
        assert acf["centre"][0] == pytest.approx(-(60 - 1) / (60 * 59))
        assert body["band"]["half_width"] is None
    if band == "simultaneous":
        assert body["band"]["per_lag_confidence"] == pytest.approx(0.95 ** (1 / body["max_lag"]))


def test_tests_option_selects_and_orders_tests(client):
    body = client.post(URL, json={"values": X, "tests": ["runs", "ljung_box"]}).get_json()
    assert {t["name"] for t in body["tests"]} == {"ljung_box", "runs"}
    assert [t["name"] for t in body["tests"]][0] == "ljung_box"  # report order, not request order
    assert all(t["meaning"] for t in body["tests"])


def test_every_test_has_a_one_line_meaning_and_a_method(client):
    body = client.post(URL, json={"values": X, "period": 6}).get_json()
    names = {t["name"] for t in body["tests"]}
    assert names == {"ljung_box", "box_pierce", "seasonal_ljung_box", "mcleod_li", "runs", "turning_points",
                     "cumulative_periodogram", "jarque_bera"}
    for t in body["tests"]:
        assert t["meaning"] and "\n" not in t["meaning"]
        assert t["method"] in ("asymptotic", "exact")


def test_monte_carlo_is_reproducible_with_a_seed_and_reports_its_error(client):
    payload = {"values": X[:25], "p_values": "monte_carlo", "replicates": 499, "seed": 2026}
    a = client.post(URL, json=payload).get_json()
    b = client.post(URL, json=payload).get_json()
    assert a["tests"] == b["tests"]
    assert a["p_values"] == {"method": "monte_carlo", "replicates": 499, "seed": 2026}
    lb = [t for t in a["tests"] if t["name"] == "ljung_box"][0]
    assert lb["method"] == "monte_carlo" and lb["mc_standard_error"] > 0
    assert lb["p_value"] >= 1 / 500  # (1 + count) / (R + 1)
    assert not any(w["code"] == "short_series" for w in a["warnings"])


def test_monte_carlo_without_seed_reports_the_seed_drawn(client):
    body = client.post(URL, json={"values": X[:25], "p_values": "monte_carlo", "replicates": 99}).get_json()
    seed = body["p_values"]["seed"]
    again = client.post(URL, json={"values": X[:25], "p_values": "monte_carlo", "replicates": 99,
                                   "seed": seed}).get_json()
    assert again["tests"] == body["tests"]


def test_short_series_warns_and_advises_monte_carlo(client):
    body = client.post(URL, json={"values": X[:20]}).get_json()
    assert "short_series" in [w["code"] for w in body["warnings"]]
    assert any("monte_carlo" in a["action"] for a in body["advice"])
    assert any("short" in c for c in body["cautions"])


@pytest.mark.parametrize("body,pointer", [
    ({"values": X, "band": "wide"}, "/band"),
    ({"values": X, "tests": ["ljung_box", "ljung_box"]}, "/tests"),
    ({"values": X, "tests": []}, "/tests"),
    ({"values": X, "tests": ["portmanteau"]}, "/tests/0"),
    ({"values": X, "p_values": "bootstrap"}, "/p_values"),
    ({"values": X, "p_values": "monte_carlo", "replicates": 10}, "/replicates"),
    ({"values": X, "p_values": "monte_carlo", "replicates": 100000}, "/replicates"),
    ({"values": X, "seed": -1}, "/seed"),
    ({"values": X, "seed": "7"}, "/seed"),
])
def test_bad_options_are_422_with_pointer(client, body, pointer):
    r = client.post(URL, json=body)
    assert r.status_code == 422
    assert pointer in [e["pointer"] for e in r.get_json()["errors"]]


def test_simulation_budget_is_enforced():
    client = create_app({"MAX_SIMULATED_VALUES": 10_000, "TESTING": True}).test_client()
    r = client.post(URL, json={"values": X, "p_values": "monte_carlo", "replicates": 999})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/replicates"
    assert "at most 166 replicates" in r.get_json()["errors"][0]["detail"]


def test_monte_carlo_with_pairwise_missing_values_is_refused(client):
    values = X[:40]
    values[5] = None
    r = client.post(URL, json={"values": values, "missing": "pairwise", "p_values": "monte_carlo"})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/p_values"


def _strings(node, path=""):
    if isinstance(node, dict):
        for key, value in node.items():
            yield from _strings(value, f"{path}/{key}")
    elif isinstance(node, list):
        for i, value in enumerate(node):
            yield from _strings(value, f"{path}/{i}")
    elif isinstance(node, str):
        yield path, node


#: Source markup that must not reach a reader: a role (:func:`x`), code quotes (``x``), a citation mark ([1]_),
#: a directive (.. note::), a constant named by its place in the code (options.MIN_OBSERVED_SHARE), a section
#: heading's underline (-----); what cutting markup out can leave (an empty parenthesis or one closed after a comma,
#: a sentence ending in "from"); Python's operators (** and //); a file of the source (tests/ files, where a claim
#: is checked, may be named); a constant's name (capitals with an underscore, but for the LAGSIGHT_ settings).
SOURCE_MARKUP = re.compile(r":[a-z]+:`|`|\[\d+\]_|^\.\. |\s\.\. [a-z]+::|\boptions\.|\(see [a-z_]+\)|-{3,}"
                           r"|\(\s*[,;]?\s*\)|,\s*\)|\bfrom\s*[).;,]|\*\*|\s//\s|(?<!tests/)\b\w+\.py\b"
                           r"|\b(?!LAGSIGHT_)[A-Z][A-Z0-9]+_[A-Z0-9_]+\b")
#: Words in capitals that are terms of the trade or formats, not names in the code.
CAPITALS = {"BENCHMARKS", "CRLF", "CUSUM", "HTTP", "JRSS", "KPSS", "NDJSON", "PACF", "PRDS"}
#: Names with underscores that are not the API's own (options, fields, values) but a reader can look up:
#: a statsmodels function named as the source of a step, and a metric of /metrics.
OUTSIDE_NAMES = {"ar_select_order", "lagsight_requests_stopped_total"}


def _public_names(methods: dict) -> set[str]:
    """Every key and every one-word value of /v1/methods and the OpenAPI document: the API's own names."""
    from .spec_tools import spec

    def walk(node):
        if isinstance(node, dict):
            for key, value in node.items():
                yield key
                yield from walk(value)
        elif isinstance(node, list):
            for value in node:
                yield from walk(value)
        elif isinstance(node, str) and re.fullmatch(r"[a-z][a-z0-9_]*", node):
            yield node

    return set(walk(methods)) | set(walk(spec()))


def test_methods_text_is_plain_words(client):
    methods = client.get("/v1/methods").get_json()
    prose = [(path, text) for path, text in _strings(methods) if " " in text]
    marked = [(path, SOURCE_MARKUP.search(text).group(0)) for path, text in prose if SOURCE_MARKUP.search(text)]
    assert marked == []
    assert [path for path, text in prose if text.count("(") != text.count(")")] == []
    assert {w for _, text in prose for w in re.findall(r"\b[A-Z][A-Z0-9]{3,}\b", text)} <= CAPITALS
    # A name from the code (two or more words of 3+ letters joined by underscores: min_blocks, find_changes) must
    # be one the API itself uses; subscripts of formulas (r_k, tau_k, s_alpha) are not names.
    public = _public_names(methods) | OUTSIDE_NAMES
    code_names = {w for _, text in prose for w in re.findall(r"(?<![\w./])[a-z]+(?:_[a-z0-9]+)+\b", text)
                  if sum(len(part) >= 3 for part in w.split("_")) >= 2}
    assert code_names - public == set()
    assert "the short lag min(10, floor(n / 5)), or min(2 m, floor(n / 5)) with a period m, raised" in (
        methods["portmanteau_lags"])
    assert "at least 0.5 of the slots" in methods["timestamps"]["rules"]  # options.MIN_OBSERVED_SHARE, as its value
    chart_data = methods["data_out"]["chart_data"]
    assert "at most 2,000 by" in chart_data and "within 3 standard errors" in chart_data
    # Citation marks become the works they cite (the docstrings' reference lists).
    assert ("amplitude-modulated estimator (Parzen 1963; Dunsmuir and Robinson 1981) forms"
            in methods["options"]["missing"]["pairwise"])
    assert "(PRDS, Benjamini and Yekutieli 2001)" in methods["across_series"]
    assert "recalled from Haugh 1976)" in methods["driver_check"]["method"]
    assert "lambda = 0 (Box and Cox 1964; scipy.special.boxcox)" in methods["options"]["transform"]["rules"]
    # Constants of the code appear as their values.
    assert "4,000 i.i.d. normal series" in methods["evidence"] and "at most 2,000,000 values" in methods["evidence"]
    assert "for 999 random orderings" in methods["stability"]["change_points"]
    assert "Binary segmentation of per-block statistics. Method: The series" in methods["stability"]["change_points"]
    assert "from 0 to min(10, floor(n / 10))" in methods["driver_check"]["method"]


@pytest.mark.parametrize("leftover", [
    "positively dependent (PRDS,); series", "the formula is recalled from).", "the ones of masked (see vega_lite.py)",
    "REPLICATES_PER_TABLE i.i.d. series", "(x**lambda - 1)", "min(10, n // 5)", "Method ------ The series",
    "run :func:`find_changes`", "cut into blocks, see ``pipeline.blocks``", "read as numbers.py says"])
def test_the_plain_words_check_finds_leftovers(leftover):
    """The check above can fail: each leftover that reached /v1/methods once is caught."""
    assert SOURCE_MARKUP.search(leftover)


def test_verdict_evidence_and_rule_are_in_methods(client):
    methods = client.get("/v1/methods").get_json()
    assert "Bonferroni" in methods["decision_rule"] and "Sidak" in methods["decision_rule"]
    assert {t["name"] for t in methods["test_catalogue"]} == set(methods["options"]["tests"]["enum"])
    body = client.post(URL, json={"values": X, "period": 6}).get_json()
    sources = {e["source"] for e in body["verdict"]["evidence"]}
    assert sources == {"lag_one", "ljung_box_short", "ljung_box_long", "spike", "seasonal_spike", "rank_ljung_box",
                       "rank_spike"}
    assert body["verdict"]["confidence"] in ("moderate", "weak", "strong")


def test_exceedances_count_expected_and_chance_probability(client):
    # Reference: scipy.stats.binom.sf(k - 1, K, alpha) = P(at least k of K lags outside by chance).
    from scipy.stats import binom

    rng = np.random.default_rng(8)
    e = rng.standard_normal(140)
    x = (e[12:] + 0.6 * e[:-12]).tolist()  # a seasonal spike at lag 12
    body = client.post(URL, json={"values": x, "period": 12}).get_json()
    ex, acf = body["exceedances"], body["acf"]
    assert ex["count"] == len(acf["outside"]) and ex["lags_tested"] == body["max_lag"]
    assert ex["expected"] == pytest.approx(0.05 * body["max_lag"])
    assert ex["chance_probability"] == pytest.approx(binom.sf(ex["count"] - 1, body["max_lag"], 0.05), rel=1e-10)
    assert sorted(ex["far"] + ex["marginal"]) == acf["outside"]
    assert 12 in ex["seasonal"] and set(ex["seasonal"]) <= {12, 24, 36}


@pytest.mark.parametrize("values", [
    [1.7e308, -1.7e308, 1.6e308, 0.0, -1e308, 1.5e308, 3.0],  # differences overflow float64
    [1e-300, 3e-300, 2e-300, 5e-310, 4e-300],  # subnormal neighbourhood
    [1e300, 1e-300, 0.0, 1.0, -1e300, 2.0],  # mixed magnitudes
    [1.0, -1.0] * 20,  # all variance at frequency 0.5; squares constant
])
def test_extreme_values_give_finite_reports_without_warnings(client, values):
    # Warnings are errors in this suite: an overflow inside the engine would fail here.
    r = client.post(URL, json={"values": values})
    assert r.status_code == 200
    assert_valid(r.get_json(), "Report")
    for t in r.get_json()["tests"]:
        assert (t["p_value"] is None) == (t["note"] is not None)

"""The reading: one decision per series, and nothing said beside it that contradicts it.

The simulation targets (false alarms, power, mechanisms) are in test_calibration_targets.py; here: coherence
over random and adversarial inputs (a property test), the pieces of the decision against outside references,
and the words.
"""
from __future__ import annotations

import re

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.stats import rankdata

from lagsight import create_app
from lagsight.consult import advice as advice_mod
from lagsight.consult.words import plural
from lagsight.engine import channels, whiteness
from lagsight.engine.ranks import tied_ranks

from .spec_tools import spec

URL = "/v1/diagnostics"
WHITE_FIRST = {"nothing_to_model", "model_variance"}
PRIMARY = {"outliers", "over_differenced", "trend", "unit_root", "seasonal", "autocorrelation"}
#: "1 values", "1 autocorrelations": a count of one with a plural noun.
ONE_PLURAL = re.compile(r"(?<![\d.,])(?<!lag )(?<!lags )(?<!index )(?<!and )1 (?!of\b|or\b|to\b|and\b|is\b)([a-z]+s)\b")


@pytest.fixture(scope="module")
def client():
    return create_app({"TESTING": True}).test_client()


def assert_coherent(body: dict) -> None:
    """Every part of the reading agrees with the decision."""
    v = body["verdict"]
    codes = [a["code"] for a in body["advice"]]
    text = " ".join(body["interpretation"] + [a["action"] + " " + a["reason"] for a in body["advice"]]
                    + body["cautions"])
    assert body["interpretation"][0] == v["summary"]
    assert all(c in advice_mod.CODES for c in codes)
    against = any(e["against_white_noise"] for e in v["evidence"])
    if v["white_noise"] is False:
        assert v["summary"].startswith("Not white noise") and against
        assert v["structure"] and v["structure"][0] in PRIMARY and v["p_value"] < v["threshold"]
        assert codes and codes[0] not in ("nothing_to_model",)
    elif v["white_noise"] is True:
        assert v["summary"].startswith(("Consistent with white noise", "No significant autocorrelation, but"))
        assert set(v["structure"]) <= {"volatility_clustering"} and not against and v["p_value"] >= v["threshold"]
        assert codes[0] in WHITE_FIRST
        for sentence in body["interpretation"]:
            assert "Not white noise" not in sentence
            if re.search(r"(?<!none )rejects white noise", sentence):
                assert "does not count it" in sentence
    else:
        assert v["summary"].startswith("No judgement") and not v["structure"]
    if "volatility_clustering" in v["structure"]:
        assert v["white_noise"] is True and "model_variance" in codes
    if "over_differenced" in v["structure"]:
        assert "difference" not in codes and codes[0] == "undo_difference"
    if "trend" in v["structure"]:
        assert "difference" not in codes and codes[0] == "remove_trend"
    assert v["volatility"]["clustering"] == ("volatility_clustering" in v["structure"])
    assert not ONE_PLURAL.search(text), ONE_PLURAL.search(text).group(0)


def _series(kind: str, n: int, seed: int, scale: float, spike: float) -> list[float]:
    rng = np.random.default_rng(seed)
    e = rng.standard_normal(n)
    x = {
        "noise": e,
        "t3": rng.standard_t(3, n),
        "ar": np.convolve(e, 0.7 ** np.arange(30))[:n],
        "walk": np.cumsum(e),
        "trend": np.arange(n) * 3.0 / n + e,
        "diff": np.diff(rng.standard_normal(n + 1)),
        "ties": np.round(e),
        "spike": np.where(np.arange(n) == n // 2, spike, e),
        "cycle": np.sin(np.arange(n) * 2 * np.pi / 7) + 0.3 * e,
        "steps": np.repeat(rng.standard_normal(n // 5 + 1), 5)[:n],
    }[kind]
    return (x * scale).tolist()


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(kind=st.sampled_from(["noise", "t3", "ar", "walk", "trend", "diff", "ties", "spike", "cycle", "steps"]),
       n=st.integers(5, 400), seed=st.integers(0, 2**32 - 1), scale=st.sampled_from([1e-6, 1.0, 3e5]),
       spike=st.sampled_from([5.0, 40.0, -300.0]), period=st.sampled_from([None, 4, 7, 12]),
       model_df=st.sampled_from([0, 1, 3]), confidence=st.sampled_from([0.9, 0.95, 0.99]))
def test_the_reading_never_contradicts_the_decision(client, kind, n, seed, scale, spike, period, model_df, confidence):
    body = {"values": _series(kind, n, seed, scale, spike), "model_df": model_df, "confidence": confidence}
    if period is not None and period < n // 2:
        body["period"] = period
    r = client.post(URL, json=body)
    if r.status_code == 422:  # e.g. model_df >= n, or a constant series: refused, not read
        return
    assert r.status_code == 200, r.get_json()
    assert_coherent(r.get_json())


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(values=st.lists(st.one_of(st.floats(-1e6, 1e6, allow_nan=False), st.integers(-3, 3)), min_size=3,
                       max_size=80))
def test_arbitrary_values_get_a_coherent_reading_or_a_clear_refusal(client, values):
    r = client.post(URL, json={"values": values})
    assert r.status_code in (200, 422)
    if r.status_code == 200:
        assert_coherent(r.get_json())


@pytest.mark.parametrize("detail", ["full", "brief"])
def test_batch_verdicts_are_the_single_verdicts(client, detail):
    rng = np.random.default_rng(11)
    series = [{"id": i, "values": _series(k, 150, i, 1.0, 30.0)}
              for i, k in enumerate(["noise", "ar", "walk", "trend", "diff", "spike", "cycle"])]
    batch = client.post(URL + "/batch", json={"series": series, "detail": detail}).get_json()
    for s, result in zip(series, batch["results"]):
        single = client.post(URL, json={"values": s["values"]}).get_json()
        assert result["verdict"] == single["verdict"]
    del rng


def test_filled_values_are_left_out_of_the_evidence_and_counted_in_a_caution(client):
    rng = np.random.default_rng(3)
    values = rng.standard_normal(300).tolist()
    for i in rng.choice(np.arange(1, 299), size=120, replace=False):
        values[i] = None
    body = client.post(URL, json={"values": values, "missing": "interpolate"}).get_json()
    assert body["verdict"]["filled_values_excluded"] == 120
    assert any("120 values of this series were filled" in c for c in body["cautions"])
    # The filled series itself is strongly autocorrelated (straight lines through gaps): the evidence is not.
    assert body["acf"]["values"][0] > 0.2 and body["verdict"]["white_noise"] is True


def test_an_isolated_extreme_value_is_named_in_a_caution(client):
    rng = np.random.default_rng(4)
    values = rng.standard_normal(200)
    values[77] = 40.0
    body = client.post(URL, json={"values": values.tolist()}).get_json()
    assert any("index 77" in c for c in body["cautions"])


def test_advice_codes_are_said_once_and_the_spec_lists_the_same():
    schema = spec()["components"]["schemas"]
    assert tuple(schema["Advice"]["properties"]["code"]["enum"]) == advice_mod.CODES
    assert tuple(schema["Evidence"]["properties"]["source"]["enum"]) == channels.COMPONENTS


def test_ranks_are_average_ranks():
    # Reference: scipy.stats.rankdata (method "average"), with ties, and on the observed values of masked rows.
    rng = np.random.default_rng(2)
    ties = rng.integers(0, 5, (40, 30)).astype(float)
    np.testing.assert_array_equal(tied_ranks(ties, None), rankdata(ties, axis=1))
    y = rng.standard_normal((40, 30))
    mask = rng.uniform(size=y.shape) > 0.3
    ranked = tied_ranks(y, mask)
    for i in range(40):
        np.testing.assert_array_equal(ranked[i][mask[i]], rankdata(y[i][mask[i]]))


def test_standardised_autocorrelations_follow_the_published_formula():
    # Reference: the formula of Lobato, Nankervis and Savin (2001) / Diebold (1986) written out per row:
    # z_k = r_k / sqrt(v_k max(1, tau_k)), v_k = (n - k) / (n (n + 2)),
    # tau_k = (sum_{t>k} d_t^2 d_{t-k}^2 / (n - k)) / (sum d_t^2 / n)^2.
    rng = np.random.default_rng(8)
    x = rng.standard_t(4, (5, 90))
    z, r = channels.standardised(x, None, 12, robust=True)
    for i in range(5):
        d = x[i] - x[i].mean()
        n = d.size
        g0 = (d * d).sum() / n
        for k in range(1, 13):
            rk = (d[k:] * d[:-k]).sum() / (d * d).sum()
            tau = ((d[k:] ** 2) * (d[:-k] ** 2)).sum() / (n - k) / g0 ** 2
            assert r[i, k - 1] == pytest.approx(rk, rel=1e-10)
            assert z[i, k - 1] == pytest.approx(rk / np.sqrt((n - k) / (n * (n + 2.0)) * max(1.0, tau)), rel=1e-10)


def test_the_simulated_null_gives_uniform_adjusted_p_values_for_normal_noise():
    # Property of an exact Monte Carlo p-value (common practice, no source): for series from the simulated
    # distribution itself (i.i.d. normal, classical statistics), P(p <= a) <= a up to Monte Carlo error.
    rng = np.random.default_rng(99)
    layout = whiteness.Layout(15, 10, ())
    ev = whiteness.evidence(rng.standard_normal((4000, 40)), layout, 0)
    for a in (0.01, 0.05, 0.2):
        assert (ev.p_autocorrelation <= a).mean() <= a + 3 * np.sqrt(a * (1 - a) / 4000)
    assert (ev.p_autocorrelation <= 0.5).mean() > 0.4  # not conservative to the point of uselessness


@pytest.mark.parametrize(("count", "noun", "expected"), [
    (1, "autocorrelation", "1 autocorrelation"), (2, "autocorrelation", "2 autocorrelations"),
    (0, "value", "0 values"), (1, "series", "1 series"), (3, "series", "3 series"), (1, "degree", "1 degree"),
    (1.5, "value", "1.5 values"), (2, "quantity", "2 quantities")])
def test_counts_agree_in_number(count, noun, expected):
    assert plural(count, noun, "series" if noun == "series" else None) == expected

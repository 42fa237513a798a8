"""Batch option detail "brief": every field equals the matching part of the full report, on every kind of series.

The brief results are computed from the engine's arrays a block at a time, apart from the full
report and its sentences; these tests post the same batch with detail "full" and "brief" and
compare field by field (the verdict object whole, sentences included).
"""
from __future__ import annotations

import numpy as np
import orjson
import pytest

from lagsight import options, pipeline
from lagsight.outputs.brief import FIELDS

from .spec_tools import assert_valid

URL = "/v1/diagnostics/batch"
NDJSON = "application/x-ndjson"
TEST_KEYS = ("name", "lag", "df", "statistic", "p_value", "reject", "note")


def expected_brief(full: dict) -> dict:
    """The brief result a full batch result implies (the definition the brief builder must meet)."""
    if "error" in full:
        return full
    strength = full["seasonal"]["strength"]
    return {
        "id": full["id"],
        "verdict": full["verdict"],
        "name": full["name"],
        "n": full["n"],
        "n_missing": full["n_missing"],
        "max_lag": full["max_lag"],
        "period": full["period"],
        "tests": [{k: t[k] for k in TEST_KEYS} for t in full["tests"]],
        "exceedances": {"count": full["exceedances"]["count"], "outside": full["acf"]["outside"]},
        "seasonal_strength": None if strength is None else strength["value"],
        "warnings": full["warnings"],
    }


# --- invented series (simulated, seeded; not references) -------------------------------------------

def _rng(seed):
    return np.random.default_rng(seed)


def _noise(n, seed):
    return _rng(seed).standard_normal(n)


def _ar(n, phi, seed):
    e = _rng(seed).standard_normal(n + 50)
    x = np.zeros_like(e)
    for t in range(1, e.size):
        x[t] = phi * x[t - 1] + e[t]
    return x[50:]


def _seasonal(n, period, amplitude, seed):
    return amplitude * np.sin(2 * np.pi * np.arange(n) / period) + _noise(n, seed)


def _volatile(n, seed):
    """Uncorrelated values whose variance switches between calm and stormy stretches."""
    rng = _rng(seed)
    scale = np.repeat(rng.choice([0.3, 3.0], size=n // 10 + 1), 10)[:n]
    return scale * rng.standard_normal(n)


def _series_set() -> list[dict]:
    """About fifty series: noise, AR, seasonal, volatile, trending, short, alternating, of several lengths."""
    out = []
    for k in range(12):
        out.append({"id": f"noise-{k}", "values": _noise(120, k)})
    for k, phi in enumerate((0.2, 0.4, 0.6, 0.8, -0.5, 0.95)):
        out.append({"id": f"ar-{k}", "values": _ar(120, phi, 50 + k)})
    for k, amp in enumerate((0.2, 0.5, 0.8, 1.5, 3.0)):
        out.append({"id": f"cycle-{k}", "values": _seasonal(120, 12, amp, 70 + k)})
    for k in range(3):
        out.append({"id": f"volatile-{k}", "values": _volatile(200, 80 + k)})
    out.append({"id": "walk", "values": np.cumsum(_noise(120, 90))})
    out.append({"id": "alternating", "values": np.tile([1.0, -1.0], 20)})
    out.append({"id": "one-side", "values": np.r_[np.zeros(15), np.arange(1.0, 6.0)]})
    for k, n in enumerate((3, 5, 8, 13, 30, 49, 50)):
        out.append({"id": f"short-{n}", "values": _noise(n, 100 + k), "name": f"short series {n}"})
    for k in range(6):
        out.append({"id": k, "values": _noise(60 + 10 * k, 120 + k)})
    for k in range(6):
        out.append({"id": f"monthly-{k}", "values": _seasonal(48, 12, 1.0, 130 + k)})
    return [{**s, "values": np.round(s["values"], 6).tolist()} for s in out]


def _with_nulls(series: list[dict], share: float, seed: int) -> list[dict]:
    rng = _rng(seed)
    out = []
    for s in series:
        values = list(s["values"])
        if len(values) >= 40:
            for i in rng.choice(np.arange(1, len(values) - 1), size=int(share * len(values)), replace=False):
                values[int(i)] = None
        out.append({**s, "values": values})
    return out


def _post_both(client, body: dict) -> tuple[dict, dict]:
    full = client.post(URL, json=body)
    brief = client.post(URL, json={**body, "detail": "brief"})
    assert full.status_code == 200, full.get_json()
    assert brief.status_code == 200, brief.get_json()
    return full.get_json(), brief.get_json()


def _assert_brief_equals_full(full: dict, brief: dict) -> None:
    assert_valid(brief, "BriefBatchResponse")
    assert brief["detail"] == "brief" and brief["summary"] == full["summary"]
    assert len(brief["results"]) == len(full["results"])
    for f, b in zip(full["results"], brief["results"]):
        expected = expected_brief(f)
        for key in expected:  # field by field first, for a readable failure
            assert b[key] == expected[key], (f.get("id"), key)
        assert b == expected
        # The same bytes too: field order and the float values themselves, not only equality.
        assert orjson.dumps(b) == orjson.dumps(expected), f.get("id")


OPTION_SETS = {
    "defaults": {},
    "period 12": {"period": 12},
    "model_df 3, max_lag 12": {"model_df": 3, "max_lag": 12},
    "model_df leaves no df": {"model_df": 2, "max_lag": 2},
    "confidence 0.9": {"confidence": 0.9, "period": 6},
    "confidence 0.999": {"confidence": 0.999},
    "band small_sample": {"band": "small_sample", "period": 12},
    "band bartlett": {"band": "bartlett", "period": 4},
    "band simultaneous": {"band": "simultaneous", "period": 12},
    "box_pierce only": {"tests": ["box_pierce", "mcleod_li", "runs"]},
    "no portmanteau": {"tests": ["runs", "turning_points", "jarque_bera"], "period": 12},
    "monte_carlo": {"p_values": "monte_carlo", "replicates": 99, "seed": 11, "period": 12},
    "transform difference": {"transform": {"difference": 1}},
}


@pytest.mark.parametrize("name", list(OPTION_SETS))
def test_brief_equals_full_on_every_shared_field(client, name):
    full, brief = _post_both(client, {"series": _series_set(), **OPTION_SETS[name]})
    _assert_brief_equals_full(full, brief)


def test_brief_covers_every_verdict_and_null_case(client):
    """The series set reaches every branch of the verdict and the null-value notes (so the comparisons above bite)."""
    seen = {"white": set(), "summaries": set(), "notes": set(), "structure": set()}
    for name in OPTION_SETS:
        if name == "monte_carlo":
            continue
        _, brief = _post_both(client, {"series": _series_set(), **OPTION_SETS[name]})
        for r in brief["results"]:
            if "error" in r:
                continue
            seen["white"].add(r["verdict"]["white_noise"])
            seen["summaries"].add((r["verdict"]["summary"].split(" ")[0], r["verdict"]["confidence"]))
            seen["structure"].update(r["verdict"]["structure"])
            seen["notes"].update(t["name"] for t in r["tests"] if t["note"])
    assert seen["white"] == {True, False, None}
    assert {("Not", "strong"), ("Not", "moderate"), ("Consistent", "weak"), ("Consistent", "moderate"),
            ("No", "none")} <= seen["summaries"]
    assert _clustering_seen(client)
    assert {"autocorrelation", "seasonal", "volatility_clustering", "unit_root"} <= set(seen["structure"])
    assert {"ljung_box", "box_pierce", "mcleod_li", "cumulative_periodogram"} <= seen["notes"]


def _clustering_seen(client) -> bool:
    _, brief = _post_both(client, {"series": _series_set()})
    return any(r["verdict"]["summary"].startswith("No significant autocorrelation, but large swings")
               for r in brief["results"] if "error" not in r)


@pytest.mark.parametrize("missing", ["pairwise", "interpolate"])
def test_brief_equals_full_with_missing_values(client, missing):
    series = _with_nulls(_series_set(), 0.1, 5)
    full, brief = _post_both(client, {"series": series, "missing": missing, "period": 12})
    assert any(r.get("n_missing") for r in brief["results"])
    _assert_brief_equals_full(full, brief)


def test_brief_equals_full_with_overrides_and_errors_in_one_batch(client):
    """A mixed batch: per-series overrides, timestamps, bad items; errors read the same in both answers."""
    monthly = [f"{2019 + i // 12}-{i % 12 + 1:02d}-01" for i in range(48)]
    series = _series_set()[:20] + [
        {"id": "override", "values": _noise(90, 1).tolist(), "max_lag": 30, "confidence": 0.8, "model_df": 1},
        {"id": "stamped", "values": _seasonal(48, 12, 1.0, 2).tolist(), "timestamps": monthly},
        {"id": "constant", "values": [4.0] * 20},
        {"id": "strings", "values": [1, "2", 3]},
        {"id": "noise-0", "values": [1.0, 2.0, 4.0]},  # duplicate id
        {"id": "too-short", "values": [1.0, 2.0]},
        {"id": "gappy", "values": [1.0, None, 2.0, 5.0]},
        "not an object",
    ]
    full, brief = _post_both(client, {"series": series})
    assert full["summary"]["errors"] == 6
    _assert_brief_equals_full(full, brief)


def test_brief_does_not_depend_on_blocks(client, monkeypatch):
    body = {"series": _series_set(), "period": 12, "detail": "brief"}
    whole = client.post(URL, json=body).get_json()
    monkeypatch.setattr(pipeline, "BLOCK_POINTS", 500)
    cut = client.post(URL, json=body).get_json()
    assert cut == whole


def test_brief_answer_says_the_cautions_once(client):
    series = _series_set()
    body = client.post(URL, json={"series": series, "detail": "brief", "confidence": 0.9}).get_json()
    assert set(body) == {"detail", "results", "summary", "cautions", "full_report"}
    text = " ".join(body["cautions"])
    assert "not proof" in text and "asymptotic" in text and "short series" in text
    analysed = len(series)
    # Multiple testing across series: chance flags = sum of 1 - confidence over the series analysed.
    expected = 0.1 * analysed
    assert f"Of the {analysed} series analysed here, up to about {expected:.1f} could be called" in text
    copies = [{"id": i, "values": s["values"]} for i, s in enumerate(series * 5)]  # 0.05 x copies >= 10
    many = client.post(URL, json={"series": copies, "detail": "brief"}).get_json()
    assert f"up to about {0.05 * len(copies):.0f} could be called" in " ".join(many["cautions"])
    assert 'detail "full"' in body["full_report"]
    for r in body["results"]:
        assert set(r) == {"id", *FIELDS}
        assert "cautions" not in r and "interpretation" not in r and "charts" not in r


def test_ndjson_brief_stream_carries_the_brief_results_and_the_cautions(client, monkeypatch):
    monkeypatch.setattr(pipeline, "BLOCK_POINTS", 1000)
    series = _series_set() + [{"id": "bad", "values": [1, 2]}]
    body = {"series": series, "period": 12, "detail": "brief"}
    whole = client.post(URL, json=body).get_json()
    r = client.post(URL, json=body, headers={"Accept": NDJSON})
    assert r.status_code == 200 and r.mimetype == NDJSON
    lines = [orjson.loads(line) for line in r.data.splitlines()]
    for line in lines:
        assert_valid(line, "BatchStreamLine")
    results = [line for line in lines if line["kind"] == "result"]
    assert [line["index"] for line in results] == list(range(len(series)))  # in request order
    for line in results:
        expected = whole["results"][line["index"]]
        assert {k: v for k, v in line.items() if k not in ("kind", "index")} == expected
    last = lines[-1]
    assert last["kind"] == "summary" and last["summary"] == whole["summary"]
    assert last["cautions"] == whole["cautions"] and last["full_report"] == whole["full_report"]


def test_full_answer_is_unchanged_by_the_option(client):
    series = _series_set()[:10]
    default = client.post(URL, json={"series": series})
    full = client.post(URL, json={"series": series, "detail": "full"})
    assert default.data == full.data
    assert set(default.get_json()) == {"shared", "results", "summary"}


@pytest.mark.parametrize("value", ["short", "", None, 1, ["brief"]])
def test_unknown_detail_is_422_for_the_whole_batch(client, value):
    r = client.post(URL, json={"series": [{"id": 1, "values": [1, 2, 4]}], "detail": value})
    assert r.status_code == 422
    assert [e["pointer"] for e in r.get_json()["errors"]] == ["/detail"]


def test_brief_is_a_fraction_of_the_full_answer(client):
    """The point of the option: far fewer bytes per series (no correlogram lists, periodogram or sentences)."""
    full = client.post(URL, json={"series": _series_set(), "period": 12})
    brief = client.post(URL, json={"series": _series_set(), "period": 12, "detail": "brief"})
    assert len(brief.data) * 3 < len(full.data)  # the full answer itself is compact (shared values once, 10 digits)


def test_detail_levels_are_the_documented_ones():
    assert options.DETAIL_LEVELS == ("full", "brief") and options.DEFAULT_DETAIL == "full"


def test_brief_leaves_out_what_only_the_full_report_reads(client, monkeypatch):
    """No suggested period and no unit-root check per series in brief mode (about 35 us and 0.4 ms a series)."""
    from lagsight.engine import seasonality, stationarity

    calls = []
    monkeypatch.setattr(seasonality, "suggest_periods",
                        lambda r, *args: calls.append("suggest_period") or [None] * len(r))
    monkeypatch.setattr(stationarity, "adf_rows", lambda x: calls.append(len(x)) or [(0.0, 1.0, 0)] * len(x))
    series = [s for s in _series_set() if s["id"] in ("walk", "ar-5", "noise-1", "cycle-4")]
    brief = client.post(URL, json={"series": series, "detail": "brief"})
    # The decision's mechanism check runs the unit-root test only for rows that reject with r1 >= 0.3
    # (at most the random walk, the AR and the cycle); the report's own unit-root check and the period search do not.
    assert brief.status_code == 200 and "suggest_period" not in calls and sum(calls) <= 3
    before = len(calls)
    full = client.post(URL, json={"series": series})
    # The full report searches for a period and runs its own unit-root check (the mechanism checks take their ADF
    # from stationarity.adf_pair_rows, so the calls after ``before`` are the report's own).
    assert full.status_code == 200 and "suggest_period" in calls[before:]
    assert any(isinstance(c, int) for c in calls[before:])

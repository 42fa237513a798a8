"""The bulk path for plain batch items (lagsight.inputs.batch_items) answers exactly as the general path.

Each batch is posted twice: as it is, and with the bulk path switched off (every item through
the schema, series.prepare and plan_for one at a time). Results, errors and their pointers must
be byte for byte the same, for good items and for every kind of bad one.
"""
from __future__ import annotations

import numpy as np
import orjson
import pytest

from lagsight import create_app
from lagsight.inputs import batch_items
from lagsight.web import batch as view

URL = "/v1/diagnostics/batch"


def _noise(n: int, seed: int) -> list[float]:
    """Seeded invented values (not a reference)."""
    return np.round(10 + np.random.default_rng(seed).standard_normal(n), 4).tolist()


def _post(client, body: bytes, **headers):
    r = client.post(URL, data=body, content_type="application/json", headers=headers)
    return r.status_code, r.data


def _general_only(monkeypatch):
    monkeypatch.setattr(batch_items, "candidates", lambda raw, shared, max_points: ({}, {}))


def _both(client, monkeypatch, body: bytes, **headers):
    fast = _post(client, body, **headers)
    with monkeypatch.context() as m:
        _general_only(m)
        general = _post(client, body, **headers)
    return fast, general


def _json(obj) -> bytes:
    return orjson.dumps(obj)


GOOD = [
    {"id": "plain", "values": _noise(120, 1)},
    {"id": "own-horizon", "values": _noise(120, 39), "horizon": 3},
    {"id": 42, "values": _noise(120, 2), "name": "kiosk 42"},
    {"id": "period", "values": _noise(120, 3), "period": 12},
    {"id": "no-period", "values": _noise(120, 4), "period": None},
    {"id": "lag", "values": _noise(120, 5), "max_lag": 30},
    {"id": "lag-default", "values": _noise(120, 6), "max_lag": None},
    {"id": "conf", "values": _noise(120, 7), "confidence": 0.9},
    {"id": "df", "values": _noise(120, 8), "model_df": 2},
    {"id": "df-float", "values": _noise(120, 9), "model_df": 2.0},
    {"id": "period-float", "values": _noise(120, 10), "period": 12.0},
    {"id": "ints", "values": [3, 1, 4, 1, 5, 9, 2, 6, 5, 3, 5, 8]},
    {"id": "mixed", "values": [3, 1.5, 4, 1, 5.25, 9, 2, 6, 5, 3, 5, 8]},
    {"id": "short", "values": [1.0, 3.0, 2.0]},
    {"id": "huge", "values": [1e300, -1e300, 5e299, 2e300, -3e299]},
    {"id": "big-ints", "values": [2**63 + 5, 1, 2, 3, 2**62 + 1]},
    {"id": "int64-edge", "values": [2**63 - 1, -(2**63), 0, 5, 9]},
    {"id": "", "values": [1, 2, 4]},  # empty id: refused
    {"id": "x" * 200, "values": _noise(30, 11)},
    {"id": 2**63 - 1, "values": _noise(30, 12)},
    {"id": -(2**63), "values": _noise(30, 13)},
]

BAD = [
    {"id": "string", "values": [1, 2, "3", 4]},
    {"id": "bool", "values": [1, 2, True, 4]},
    {"id": "bools", "values": [True, False, True, False]},
    {"id": "null", "values": [1, None, 3, 4]},
    {"id": "nested", "values": [[1], [2], [3]]},
    {"id": "object", "values": [{"a": 1}, 2, 3]},
    {"id": "two", "values": [1, 2]},
    {"id": "empty", "values": []},
    {"id": "not-list", "values": "1,2,3"},
    {"id": "constant", "values": [5, 5, 5, 5, 5]},
    {"id": "constant-float", "values": [0.1] * 40},
    {"id": "period-too-long", "values": _noise(12, 14), "period": 12},
    {"id": "period-one", "values": _noise(40, 15), "period": 1},
    {"id": "period-bool", "values": _noise(40, 16), "period": True},
    {"id": "period-string", "values": _noise(40, 17), "period": "12"},
    {"id": "lag-too-high", "values": _noise(20, 18), "max_lag": 20},
    {"id": "lag-zero", "values": _noise(20, 19), "max_lag": 0},
    {"id": "lag-over-limit", "values": _noise(3000, 20), "max_lag": 2500},
    {"id": "df-too-high", "values": _noise(20, 21), "model_df": 20},
    {"id": "df-negative", "values": _noise(20, 22), "model_df": -1},
    {"id": "conf-one", "values": _noise(20, 23), "confidence": 1},
    {"id": "horizon-zero", "values": _noise(20, 37), "horizon": 0},
    {"id": "horizon-over-lag", "values": _noise(20, 38), "horizon": 8, "max_lag": 5},
    {"id": "conf-string", "values": _noise(20, 24), "confidence": "0.9"},
    {"id": "name-long", "values": _noise(20, 25), "name": "n" * 201},
    {"id": "name-number", "values": _noise(20, 26), "name": 5},
    {"id": "x" * 201, "values": _noise(20, 27)},
    {"id": True, "values": _noise(20, 28)},
    {"id": 1.5, "values": _noise(20, 29)},
    {"id": 2**63, "values": _noise(20, 30)},
    {"id": None, "values": _noise(20, 31)},
    {"values": _noise(20, 32)},
    {"id": "no-values"},
    {"id": "unknown", "values": _noise(20, 33), "colour": "red"},
    {"id": "plain", "values": _noise(120, 34)},  # repeats the first good id
    {"id": "string", "values": _noise(20, 35)},  # repeats a bad item's id: not taken, so not a repeat
    {"id": "two", "values": _noise(20, 36)},  # repeats an item that loads but fails later: a repeat
    [1, 2, 3],
    "text",
    None,
]


def _interleaved(booleans: bool = True) -> list:
    """Good and bad items in turn; without booleans, the items holding one are left out, so that the body
    holds no JSON boolean and the bulk path relies on NumPy's type discovery alone."""
    out = []
    for k in range(max(len(GOOD), len(BAD))):
        out.extend(GOOD[k:k + 1] + BAD[k:k + 1])
    if not booleans:
        out = [item for item in out if b"true" not in _json(item) and b"false" not in _json(item)]
    return out


@pytest.mark.parametrize("shared", [
    {},
    {"period": 12},
    {"period": 12, "max_lag": 10, "model_df": 1, "confidence": 0.99},
    {"horizon": 2},
    {"missing": "pairwise"},
    {"missing": "interpolate", "transform": {"difference": 1}},
    {"band": "bartlett", "tests": ["ljung_box", "runs"]},
    {"p_values": "monte_carlo", "replicates": 99, "seed": 5},
])
@pytest.mark.parametrize("detail", ["full", "brief"])
def test_bulk_and_general_paths_give_the_same_answer(client, monkeypatch, shared, detail):
    body = _json({"series": _interleaved(), "detail": detail, **shared})
    fast, general = _both(client, monkeypatch, body)
    assert fast[0] == general[0] == 200
    assert fast[1] == general[1]
    results = orjson.loads(fast[1])["results"]
    assert "error" not in results[0] and sum("error" in r for r in results) >= len(BAD) - 2
    if not shared:  # the good ones pass (shared options may not fit the short ones), the bad ones fail
        assert [r["id"] for r in results[0:len(GOOD) * 2:2] if "error" in r] == [""]


@pytest.mark.parametrize("detail", ["full", "brief"])
def test_without_booleans_type_discovery_alone_gives_the_same_answer(client, monkeypatch, detail):
    series = _interleaved(booleans=False)
    body = _json({"series": series, "detail": detail})
    assert b"true" not in body and b"false" not in body
    fast, general = _both(client, monkeypatch, body)
    assert fast[0] == 200 and fast[1] == general[1]
    results = orjson.loads(fast[1])["results"]
    errors = {r["id"] for r in results if "error" in r}
    assert {"string", "null", "nested", "object", "two", "constant"} <= errors
    assert [item["id"] for item, r in zip(series, results) if "error" in r and item in GOOD] == [""]


@pytest.mark.parametrize("token", ["NaN", "Infinity", "-Infinity", "1e400", "-1e400", "1" + "0" * 400, "true", "null",
                                   '"7"', "[7]"])
def test_non_finite_and_huge_tokens_answer_the_same(client, monkeypatch, token):
    """Tokens orjson refuses are read by the second-opinion parser (payload.py): the item must fail alone."""
    good = _json({"id": "good", "values": _noise(24, 1)}).decode()
    same_length = ", ".join(["1.5"] * 23)
    body = (f'{{"series": [{good}, {{"id": "bad", "values": [{same_length}, {token}]}}, '
            f'{{"id": "bad-short", "values": [1, {token}, 3]}}, {good.replace("good", "after")}]}}').encode()
    fast, general = _both(client, monkeypatch, body)
    assert fast == general
    results = orjson.loads(fast[1])["results"]
    assert [("error" in r) for r in results] == [False, True, True, False]
    pointers = [e["pointer"] for e in results[1]["error"]["errors"]]
    assert pointers == ["/series/1/values/23"]


def test_ndjson_answers_the_same(client, monkeypatch):
    body = _json({"series": _interleaved(), "detail": "brief", "period": 12})
    fast, general = _both(client, monkeypatch, body, Accept="application/x-ndjson")
    assert fast == general


def test_a_batch_of_equal_plain_series_takes_the_bulk_path_and_shares_one_plan(app):
    """The bulk path is used (it is not silently skipped), and equal plans are the same object."""
    series = [{"id": i, "values": _noise(60, i), "period": 12} for i in range(50)]
    shared = {"max_lag": None, "confidence": 0.95, "model_df": 0, "band": "white_noise", "tests": None,
              "p_values": "asymptotic", "replicates": 999, "seed": None, "period": None, "missing": "refuse",
              "transform": None}
    groups, own = batch_items.candidates(series, shared, app.config["MAX_POINTS"])
    assert list(groups) == [60] and groups[60] == list(range(50)) and own[0] == {"period": 12}
    with app.test_request_context(URL):
        prepared, where, errors = view.prepare_items(series, shared, app.config)
        general = view.prepare_items(series, shared, app.config, fast=False)
    assert not errors and [w[0] for w in where] == list(range(50))
    assert len({id(plan) for _, plan in prepared}) == 1
    for (s, plan), (g, gplan) in zip(prepared, general[0]):
        assert plan == gplan
        assert np.array_equal(s.values, g.values) and s.values.dtype == g.values.dtype
        for key in ("n_input", "n_missing", "period", "period_source", "frequency", "name", "warnings", "labels",
                    "missing", "transform"):
            assert getattr(s, key) == getattr(g, key), key


def test_limits_still_answer_before_any_work():
    app = create_app({"TESTING": True, "MAX_SERIES": 5, "MAX_BATCH_POINTS": 100, "MAX_POINTS": 50})
    client = app.test_client()
    too_many = client.post(URL, json={"series": [{"id": i, "values": [1, 2, 3]} for i in range(6)]})
    assert too_many.status_code == 413
    too_much = client.post(URL, json={"series": [{"id": i, "values": _noise(30, i)} for i in range(4)]})
    assert too_much.status_code == 413
    long_one = client.post(URL, json={"series": [{"id": "long", "values": _noise(60, 1)},
                                                 {"id": "ok", "values": _noise(30, 2)}]})
    assert long_one.status_code == 200
    results = long_one.get_json()["results"]
    assert results[0]["error"]["errors"][0]["pointer"] == "/series/0/values" and "error" not in results[1]

"""POST /v1/diagnostics/batch: same reports as the single route, per-series errors, limits, streaming."""
from __future__ import annotations

import numpy as np
import orjson
import pytest

from lagsight import create_app, pipeline
from lagsight.outputs.shared import merged

from .load_tools import assert_direct_load_agrees
from .spec_tools import assert_valid

URL = "/v1/diagnostics/batch"
SINGLE = "/v1/diagnostics"
NDJSON = "application/x-ndjson"
SERIES_KEYS = ("values", "timestamps", "period", "name", "missing")
OPTION_KEYS = ("period", "max_lag", "confidence", "model_df")


def _ar1(n: int, phi: float, seed: int) -> list[float]:
    """A simulated AR(1) path (demo-style invented data, not a reference)."""
    e = np.random.default_rng(seed).standard_normal(n)
    x = np.empty(n)
    x[0] = e[0]
    for t in range(1, n):
        x[t] = phi * x[t - 1] + e[t]
    return x.tolist()


def _noise(n: int, seed: int, scale: float = 1.0, shift: float = 0.0) -> list[float]:
    return (shift + scale * np.random.default_rng(seed).standard_normal(n)).tolist()


def _mixed_series() -> list[dict]:
    """Lengths from 3 to 2,500 (direct and FFT autocovariance), groups of equal plans, overrides."""
    monthly = [f"{2015 + i // 12}-{i % 12 + 1:02d}-01" for i in range(60)]
    out = [
        {"id": "numacc1", "values": [10000001, 10000003, 10000002]},  # NIST StRD NumAcc1 values
        {"id": "shop-7", "values": _noise(120, 1), "period": 12, "name": "shop 7 weekly residuals"},
        {"id": 8, "values": _ar1(120, 0.6, 2), "period": 12},
        {"id": "sensor-long", "values": _noise(2500, 3, 1e-3, 1e6), "max_lag": 60},  # FFT path
        {"id": "sensor-long-2", "values": _ar1(2500, 0.3, 4), "max_lag": 60},
        {"id": "monthly", "values": _noise(60, 5), "timestamps": monthly},
        # the same stamps again (the request describes them once), with nulls at the start that drop labels
        {"id": "monthly-2", "values": [None, None] + _noise(58, 9), "timestamps": monthly, "missing": "interpolate"},
        {"id": "monthly-gaps", "values": _noise(57, 10), "timestamps": monthly[:7] + monthly[10:],
         "missing": "interpolate"},
        {"id": "resid-arma", "values": _noise(80, 6), "model_df": 3, "confidence": 0.9},
        {"id": "few-df", "values": _noise(30, 7), "max_lag": 4, "model_df": 4},
        {"id": "default-lag", "values": _noise(200, 8), "max_lag": None},
    ]
    out += [{"id": f"same-{k}", "values": _noise(120, 100 + k), "period": 12} for k in range(40)]
    return out


def _single_body(item: dict, shared: dict) -> dict:
    body = {k: item[k] for k in SERIES_KEYS if k in item}
    for key in OPTION_KEYS:
        value = item[key] if key in item else shared.get(key)
        if value is not None:
            body[key] = value
    return body


def _report(result: dict) -> dict:
    return {k: v for k, v in result.items() if k not in ("id", "kind", "index")}


def _whole(body: dict) -> list[dict]:
    """The results of a batch answer with its shared block put back (each series' whole report)."""
    shared = body.get("shared", {})
    return [r if "error" in r else merged(r, shared) for r in body["results"]]


@pytest.fixture
def small_blocks(monkeypatch):
    """Cut the engine's work into small blocks, so that equal plans span several blocks."""
    monkeypatch.setattr(pipeline, "BLOCK_POINTS", 1000)


@pytest.mark.parametrize("shared", [{}, {"max_lag": 24, "confidence": 0.99, "model_df": 1, "period": 6}])
@pytest.mark.parametrize("blocks", ["default", "small"])
def test_batch_reports_with_shared_put_back_equal_single_reports(client, request, shared, blocks):
    if blocks == "small":
        request.getfixturevalue("small_blocks")
    series = _mixed_series()
    if shared.get("max_lag"):  # a shared max_lag of 24 does not fit the 3- and 30-point series
        series = [s for s in series if len(s["values"]) > 24 or "max_lag" in s]
    r = client.post(URL, json={"series": series, **shared})
    assert r.status_code == 200, r.get_json()
    body = r.get_json()
    assert_valid(body, "BatchResponse")
    assert [res["id"] for res in body["results"]] == [s["id"] for s in series]
    for item, result in zip(series, _whole(body)):
        assert "error" not in result, result
        single = client.post(SINGLE, json=_single_body(item, shared))
        assert single.status_code == 200, single.get_json()
        assert _report(result) == single.get_json(), item["id"]


def test_results_do_not_depend_on_the_rest_of_the_batch(client):
    series = _mixed_series()
    whole = _whole(client.post(URL, json={"series": series}).get_json())
    reordered = series[::-1]
    again = _whole(client.post(URL, json={"series": reordered}).get_json())[::-1]
    alone = [_whole(client.post(URL, json={"series": [s]}).get_json())[0] for s in series[:5]]
    assert [_report(r) for r in whole] == [_report(r) for r in again]
    assert [_report(r) for r in whole[:5]] == [_report(r) for r in alone]


GOOD = [
    {"id": "a", "values": _noise(50, 11), "period": 7},
    {"id": "b", "values": _ar1(50, 0.7, 12)},
    {"id": "c", "values": _noise(64, 13)},
]

BAD_ITEMS = [
    ({"id": "x", "values": [1, 2, "3", 4]}, "/values/2", "number"),
    ({"id": "x", "values": [1, 2, True, 4]}, "/values/2", "boolean"),
    ({"id": "x", "values": [1, 2]}, "/values", "at least 3"),
    ({"id": "x", "values": [5, 5, 5, 5, 5]}, "/values", "constant"),
    ({"id": "x", "values": [1, None, 3, 4]}, "/values/1", "missing"),
    ({"id": "x", "values": "1,2,3"}, "/values", "array"),
    ({"id": "x", "values": [1, 2, 3], "timestamps": ["2024-01-01", "later", "2024-01-03"]}, "/timestamps/1", "ISO 8601"),
    ({"id": "x", "values": [1, 2, 3], "timestamps": ["2024-01-02", "2024-01-01", "2024-01-03"]}, "/timestamps/1", "earlier"),
    ({"id": "x", "values": [1, 2, 3], "timestamps": ["2024-01-01"]}, "/timestamps", "same length"),
    ({"id": "x", "values": [1, 2, 3, 4], "max_lag": 4}, "/max_lag", "less than"),
    ({"id": "x", "values": [1, 2, 3, 5], "period": 4}, "/period", "less than"),
    ({"id": "x", "values": [1, 2, 3], "confidence": 1.5}, "/confidence", ""),
    ({"id": "x", "values": [1, 2, 3], "model_df": -1}, "/model_df", ""),
    ({"id": "x", "values": [1, 2, 3], "colour": "red"}, "/colour", "unknown"),
    ({"values": [1, 2, 3]}, "/id", "required"),
    ({"id": "", "values": [1, 2, 3]}, "/id", "string"),
    ({"id": True, "values": [1, 2, 3]}, "/id", "string"),
    ({"id": "a", "values": [1, 2, 3]}, "/id", "unique"),
    ([1, 2, 3], "", "object"),
    (None, "", "object"),
]


@pytest.mark.parametrize("bad,pointer,phrase", BAD_ITEMS)
def test_one_bad_series_leaves_the_others_intact(client, bad, pointer, phrase):
    reference = _whole(client.post(URL, json={"series": GOOD}).get_json())
    r = client.post(URL, json={"series": [GOOD[0], bad, *GOOD[1:]]})
    assert r.status_code == 200
    body = r.get_json()
    assert_valid(body, "BatchResponse")
    results = _whole(body)
    assert [_report(x) for x in results[:1] + results[2:]] == [_report(x) for x in reference]
    error = results[1]
    assert set(error) == {"id", "error"}
    assert error["id"] == (bad.get("id") if isinstance(bad, dict) and isinstance(bad.get("id"), str) else None)
    problem = error["error"]
    assert problem["status"] == 422 and problem["type"] == "urn:lagsight:problem:invalid-content"
    assert problem["instance"] == URL
    found = {e["pointer"]: e["detail"] for e in problem["errors"]}
    assert "/series/1" + pointer in found, found
    assert phrase.lower() in found["/series/1" + pointer].lower()
    assert body["summary"]["errors"] == 1 and body["summary"]["series"] == 4


@pytest.mark.parametrize("raw,pointer", [
    (b'{"series": [{"id": "a", "values": [1, 2, 4, 3]}, {"id": "b", "values": [1, NaN, 3]}]}', "/series/1/values/1"),
    (b'{"series": [{"id": "a", "values": [1, 2, 4, 3]}, {"id": "b", "values": [1, 2, 1e400]}]}', "/series/1/values/2"),
])
def test_non_finite_values_fail_only_their_series(client, raw, pointer):
    body = client.post(URL, data=raw, content_type="application/json").get_json()
    assert "error" not in body["results"][0]
    assert pointer in [e["pointer"] for e in body["results"][1]["error"]["errors"]]


def test_a_shared_option_that_does_not_fit_one_series_points_at_the_shared_option(client):
    body = client.post(URL, json={"series": [{"id": "long", "values": _noise(40, 1)},
                                             {"id": "short", "values": _noise(8, 2)}], "max_lag": 10}).get_json()
    assert body["results"][0]["max_lag"] == 10
    assert [e["pointer"] for e in body["results"][1]["error"]["errors"]] == ["/max_lag"]


def test_per_series_overrides_and_shared_defaults(client):
    series = [{"id": "shared", "values": _noise(100, 1)},
              {"id": "own", "values": _noise(100, 2), "period": 4, "max_lag": 12, "confidence": 0.9, "model_df": 2},
              {"id": "auto-lag", "values": _noise(100, 3), "max_lag": None}]
    results = _whole(client.post(URL, json={"series": series, "period": 7, "max_lag": 15, "confidence": 0.99,
                                     "model_df": 1}).get_json())
    assert [(r["period"], r["max_lag"], r["confidence"], r["model_df"]) for r in results] == [
        (7, 15, 0.99, 1), (4, 12, 0.9, 2), (7, 20, 0.99, 1)]  # auto: max(floor(10 log10 100), 2 * 7) = 20


def test_summary_counts_verdicts_and_errors(client):
    series = [
        {"id": "noise", "values": _noise(300, 21)},
        {"id": "ar", "values": _ar1(300, 0.8, 22)},
        {"id": "ar-2", "values": _ar1(300, -0.7, 23)},
        {"id": "no-df", "values": _noise(30, 24), "max_lag": 3, "model_df": 3},
        {"id": "flat", "values": [2, 2, 2]},
    ]
    body = client.post(URL, json={"series": series}).get_json()
    verdicts = [r["verdict"]["white_noise"] if "verdict" in r else "error" for r in body["results"]]
    assert verdicts[1:] == [False, False, None, "error"]
    expected = {"series": 5, "white_noise": verdicts.count(True), "not_white_noise": 2, "undetermined": 1, "errors": 1}
    across = body["summary"].pop("false_discovery")
    assert body["summary"] == expected
    assert across["analysed"] == 4 and across["flagged"] == 2 and across["q_values"][4] is None
    assert set(across["standing_out_ids"]) == {"ar", "ar-2"}


def test_false_discovery_q_values_are_benjamini_hochberg():
    # Reference: statsmodels.stats.multitest.multipletests(method="fdr_bh") on the same p-values.
    from statsmodels.stats.multitest import multipletests

    from lagsight.consult.across import q_values

    p = list(np.random.default_rng(5).uniform(size=40) ** 3) + [1e-12, 0.5, 0.5, 1.0]
    assert q_values(p) == pytest.approx(list(multipletests(p, method="fdr_bh")[1]), rel=1e-12, abs=0)
    assert q_values([]) == []


def _problem(r, status: int) -> dict:
    assert r.status_code == status, r.get_data(as_text=True)[:300]
    assert r.mimetype == "application/problem+json"
    body = r.get_json()
    assert_valid(body, "Problem")
    return body


@pytest.mark.parametrize("body,pointer", [
    ({}, "/series"),
    ({"series": []}, "/series"),
    ({"series": {"id": "a"}}, "/series"),
    ({"series": None}, "/series"),
    ({"series": "a,b"}, "/series"),
    ({"series": [{"id": "a", "values": [1, 2, 3]}], "confidence": 0}, "/confidence"),
    ({"series": [{"id": "a", "values": [1, 2, 3]}], "model_df": "2"}, "/model_df"),
    ({"series": [{"id": "a", "values": [1, 2, 3]}], "values": [1, 2, 3]}, "/values"),
])
def test_invalid_shared_fields_are_422_for_the_whole_batch(client, body, pointer):
    problem = _problem(client.post(URL, json=body), 422)
    assert pointer in [e["pointer"] for e in problem["errors"]]


def test_limits_are_enforced_before_validation_and_reported_in_methods():
    app = create_app({"TESTING": True, "MAX_SERIES": 3, "MAX_BATCH_POINTS": 20, "MAX_LAG": 5})
    client = app.test_client()
    limits = client.get("/v1/methods").get_json()["limits"]
    assert (limits["max_series"], limits["max_batch_points"], limits["max_lag"]) == (3, 20, 5)
    # Items that would fail validation still count: the limits are checked first.
    too_many = [{"id": i, "values": "not checked yet"} for i in range(4)]
    assert "4" in _problem(client.post(URL, json={"series": too_many}), 413)["detail"]
    too_long = [{"id": i, "values": [0.5] * 7} for i in range(3)]
    problem = _problem(client.post(URL, json={"series": too_long}), 413)
    assert "21" in problem["detail"] and problem["errors"][0]["pointer"] == "/series"
    ok = [{"id": i, "values": _noise(6, i)} for i in range(3)]
    problem = _problem(client.post(URL, json={"series": ok, "max_lag": 6}), 422)
    assert problem["errors"][0]["pointer"] == "/max_lag"
    own = client.post(URL, json={"series": [*ok[:2], {"id": 9, "values": _noise(6, 9), "max_lag": 6}]}).get_json()
    assert "error" in own["results"][2] and own["results"][2]["error"]["errors"][0]["pointer"] == "/series/2/max_lag"
    assert own["results"][0]["max_lag"] == 5  # the default rule is capped at the deployment's limit


def test_body_size_limit_is_413():
    client = create_app({"TESTING": True, "MAX_BODY_BYTES": 500}).test_client()
    _problem(client.post(URL, json={"series": [{"id": 1, "values": list(range(200))}]}), 413)


@pytest.mark.parametrize("accept", ["text/csv", "application/xml"])
def test_unacceptable_media_type_is_406(client, accept):
    _problem(client.post(URL, json={"series": GOOD}, headers={"Accept": accept}), 406)


@pytest.mark.parametrize("accept", [None, "*/*", "application/json", "application/*",
                                    "application/x-ndjson;q=0.5, application/json"])
def test_json_is_answered_unless_ndjson_is_preferred(client, accept):
    headers = {"Accept": accept} if accept else {}
    r = client.post(URL, json={"series": GOOD}, headers=headers)
    assert r.status_code == 200 and r.mimetype == "application/json"


def _lines(r) -> list[dict]:
    assert r.status_code == 200 and r.mimetype == NDJSON
    raw = r.get_data()
    assert raw.endswith(b"\n")
    lines = [orjson.loads(line) for line in raw.split(b"\n")[:-1]]
    for line in lines:
        assert_valid(line, "BatchStreamLine")
    return lines


def test_ndjson_stream_carries_the_same_results_and_a_final_summary(client, small_blocks):
    series = [GOOD[0], {"id": "bad", "values": [1, 1, 1]}, *_mixed_series()[1:]]
    plain = client.post(URL, json={"series": series}).get_json()
    lines = _lines(client.post(URL, json={"series": series}, headers={"Accept": NDJSON}))
    assert lines[-1] == {"kind": "summary", "summary": plain["summary"]}
    results = lines[:-1]
    assert all(line["kind"] == "result" for line in results)
    assert [line["index"] for line in results] == list(range(len(series)))  # request order, failures included
    assert "error" in results[1]
    by_index = {line.pop("index"): line for line in results}
    for i, expected in enumerate(_whole(plain)):
        got = by_index[i]
        assert got.pop("kind") == "result"
        assert got == expected


def test_ndjson_keeps_request_order_when_the_engine_finishes_blocks_in_another(app, monkeypatch, small_blocks):
    """Series of two lengths, interleaved: the engine groups equal lengths, so its blocks come out of request
    order; the stream still sends the lines by index, the failed ones in their place, the summary last."""
    import lagsight.web.batch as view

    real, finished = view.run_blocks, []

    def recording(items, *args, **kwargs):
        for block in real(items, *args, **kwargs):
            finished.extend(j for j, _ in block)
            yield block

    monkeypatch.setattr(view, "run_blocks", recording)
    series = [{"id": f"s{i}", "values": _noise(90 if i % 2 else 160, i)} for i in range(16)]
    series[5] = {"id": "too-short", "values": [1.0, 2.0]}
    series[12] = {"id": "flat", "values": [3.0] * 20}
    plain = app.test_client().post(URL, json={"series": series}).get_json()
    finished.clear()
    r = app.test_client().post(URL, json={"series": series}, headers={"Accept": NDJSON}, buffered=False)
    chunks = [c for c in r.response if c]
    r.close()
    assert finished != sorted(finished)  # the engine's order is not the request's
    lines = [orjson.loads(line) for chunk in chunks for line in chunk.splitlines()]
    for line in lines:
        assert_valid(line, "BatchStreamLine")
    assert [line["index"] for line in lines[:-1]] == list(range(16))
    assert [line["id"] for line in lines[:-1]] == [s["id"] for s in series]
    assert "error" in lines[5] and "error" in lines[12]
    assert lines[-1] == {"kind": "summary", "summary": plain["summary"]}
    for line, expected in zip(lines[:-1], _whole(plain)):
        assert {k: v for k, v in line.items() if k not in ("kind", "index")} == expected
    assert len(chunks) >= 2  # still sent as blocks finish, not held to the end


def test_ndjson_is_sent_block_by_block(app, small_blocks):
    series = [{"id": i, "values": _noise(200, i)} for i in range(30)]  # 6,000 values: 6 blocks of 1,000
    r = app.test_client().post(URL, json={"series": series}, headers={"Accept": NDJSON}, buffered=False)
    chunks = [c for c in r.response if c]
    assert len(chunks) >= 6
    assert all(chunk.endswith(b"\n") for chunk in chunks)
    r.close()


def test_the_first_ndjson_block_is_sent_before_the_next_is_computed(app, monkeypatch, small_blocks):
    """Nothing between the view and the server (logging, headers) may read the stream ahead."""
    import lagsight.web.batch as view

    real, computed = view.run_blocks, []

    def counting(items, *args, **kwargs):
        for block in real(items, *args, **kwargs):
            computed.append(len(block))
            yield block

    monkeypatch.setattr(view, "run_blocks", counting)
    series = [{"id": i, "values": _noise(200, i)} for i in range(30)]
    r = app.test_client().post(URL, json={"series": series}, headers={"Accept": NDJSON}, buffered=False)
    chunks = iter(r.response)
    first = next(chunks)
    assert first.startswith(b'{"kind":"result"') and len(computed) == 1
    rest = b"".join(chunks)
    assert len(computed) >= 6 and rest.endswith(b"\n")
    r.close()


def test_a_failure_mid_stream_ends_with_an_error_line(app, monkeypatch, caplog, small_blocks):
    import lagsight.web.batch as view

    real = view.run_blocks

    def fail_after_first(items, *args, **kwargs):
        blocks = real(items, *args, **kwargs)
        yield next(blocks)
        raise RuntimeError("secret internal detail")

    monkeypatch.setattr(view, "run_blocks", fail_after_first)
    series = [{"id": i, "values": _noise(200, i)} for i in range(20)]
    r = app.test_client().post(URL, json={"series": series}, headers={"Accept": NDJSON})
    lines = _lines(r)
    assert lines[-1]["kind"] == "error" and lines[-1]["error"]["status"] == 500
    assert 0 < len(lines) - 1 < 20 and "secret" not in r.get_data(as_text=True)
    sent = [line["index"] for line in lines[:-1]]
    assert sent == sorted(sent)
    assert any("streaming" in rec.message for rec in caplog.records)


DIRECT_ITEMS = [
    {"id": "a", "values": [1, 2.5, 3, 4]},
    {"id": 7, "values": [1, 2, 3, 4], "name": "kiosk", "period": 2, "max_lag": None},
    {"id": "b", "values": [1, 2, 3, 4], "name": None, "period": None, "max_lag": 2, "confidence": 0.9, "model_df": 1},
    {"id": "c", "values": [1, None, 3, 4]},
    {"id": "t", "values": [1, 2, 3], "timestamps": ["2024-01-01", "2024-01-02", "2024-01-03"]},
    {"id": "t0", "values": [1, 2, 3], "timestamps": None},
]
FULL_ONLY_ITEMS = [
    {"id": "s", "values": [1, 2, 3], "timestamps": ["2024-01-01", "2024-01-02"]},  # the schema-level length rule
    {"id": "s1", "values": [1, 2, 3], "timestamps": ["2024-01-01", "", "2024-01-03"]},
    {"id": "s2", "values": [1, 2, 3], "timestamps": ["2024-01-01", 20240102, "x" * 65]},
    {"id": "s3", "values": [1, 2, 3], "timestamps": "2024-01-01"},
    {"id": "u", "values": [1, 2, 3], "colour": "red"},
    {"id": "v", "values": [1, 2, "3"]},
    {"id": True, "values": [1, 2, 3]},
    {"id": "w", "values": [1, 2, 3], "period": 1},
    {"values": [1, 2, 3]},
]


@pytest.mark.parametrize("item", DIRECT_ITEMS + FULL_ONLY_ITEMS)
def test_direct_item_load_agrees_with_the_schema(item):
    from lagsight.inputs.schema import BatchSeries
    from lagsight.web.batch import ITEM_LOAD

    assert_direct_load_agrees(BatchSeries(), ITEM_LOAD, item, item in DIRECT_ITEMS)


def test_monte_carlo_batch_shares_one_seed_and_one_null_per_length(client, monkeypatch):
    from lagsight.engine import analysis

    calls = []
    real = analysis.monte_carlo

    def counting(observed, n, spec):
        calls.append((n, spec.seed))
        return real(observed, n, spec)

    monkeypatch.setattr(analysis, "monte_carlo", counting)
    monkeypatch.setattr(pipeline, "BLOCK_POINTS", 100)  # would cut the 60-point group into blocks
    series = [{"id": i, "values": _noise(60, i)} for i in range(6)] + [{"id": "long", "values": _noise(90, 9)}]
    body = client.post(URL, json={"series": series, "p_values": "monte_carlo", "replicates": 199}).get_json()
    assert all("error" not in r for r in body["results"])
    assert sorted(n for n, _ in calls) == [60, 90]  # one simulated null per distinct length
    assert len({seed for _, seed in calls}) == 1  # one seed drawn for the batch


def test_monte_carlo_work_of_the_whole_batch_is_limited_before_simulating():
    app = create_app({"TESTING": True, "MAX_SIMULATED_VALUES": 60_000})  # each series alone fits
    client = app.test_client()
    one_length = [{"id": i, "values": _noise(100, i)} for i in range(5)]
    ok = client.post(URL, json={"series": one_length, "p_values": "monte_carlo", "replicates": 199}).get_json()
    assert all("error" not in r for r in ok["results"])  # one null: 199 x 100 = 19,900 simulated values
    lengths = [{"id": i, "values": _noise(100 + i, i)} for i in range(5)]
    problem = _problem(client.post(URL, json={"series": lengths, "p_values": "monte_carlo", "replicates": 199}), 422)
    assert problem["errors"][0]["pointer"] == "/replicates" and "5 distinct" in problem["detail"]


def test_shared_missing_and_transform_apply_unless_a_series_overrides_them(client):
    gappy = [1.0, None, 3.0, 2.0, 5.0, 4.0, 6.0, 5.5, 7.0, 6.0, 8.0, 7.5]
    series = [{"id": "inherits", "values": gappy},
              {"id": "refuses", "values": gappy, "missing": "refuse"},
              {"id": "own-transform", "values": [abs(v) + 1 for v in _noise(30, 3)], "transform": None}]
    body = {"series": series, "missing": "interpolate", "transform": {"difference": 1}}
    results = _whole(client.post(URL, json=body).get_json())
    assert results[0]["missing"]["method"] == "interpolate" and results[0]["n_missing"] == 1
    assert [e["pointer"] for e in results[1]["error"]["errors"]] == ["/series/1/values/1"]
    single = client.post(SINGLE, json={"values": gappy, "missing": "interpolate", "transform": {"difference": 1}})
    assert _report(results[0]) == single.get_json()
    assert results[2]["n"] == 30  # no differencing for this series


@pytest.mark.parametrize("big", [2**63, -(2**63) - 1, 10**30])
def test_integer_ids_beyond_64_bits_fail_only_their_series(client, big):
    raw = b'{"series": [{"id": %d, "values": [1, 2, 4, 3]}, {"id": 1, "values": [1, 2, 4, 3]}]}' % big
    results = _whole(client.post(URL, data=raw, content_type="application/json").get_json())
    assert results[0]["error"]["errors"][0]["pointer"] == "/series/0/id" and "error" not in results[1]


def test_series_that_share_timestamps_have_them_described_once(client, monkeypatch):
    """Parsing and describing 120 stamps costs about 1 ms; a batch describes each distinct list once."""
    from lagsight.inputs import timestamps

    calls = []
    real = timestamps.describe
    monkeypatch.setattr(timestamps, "describe", lambda stamps, *a, **k: calls.append(len(stamps)) or real(stamps, *a, **k))
    daily = [f"2025-03-{d:02d}" for d in range(1, 31)]
    series = [{"id": i, "values": _noise(30, 200 + i), "timestamps": daily} for i in range(6)]
    series.append({"id": "other", "values": _noise(29, 300), "timestamps": daily[1:]})
    body = client.post(URL, json={"series": series}).get_json()
    assert body["summary"]["errors"] == 0 and all(r["frequency"] == "daily" for r in body["results"])
    assert calls == [30, 29]


@pytest.mark.parametrize("detail", ["full", "brief"])
def test_batch_answer_keeps_request_order_across_blocks_and_errors(client, small_blocks, detail):
    """Results in request order across several engine blocks, with errors first, in the middle and last;
    the summary counts them; the brief answer's notes follow; the body is plain compact JSON with its
    length declared."""
    series = [{"id": "bad-first", "values": [1, 2]}]
    series += [{"id": f"ok-{k}", "values": _noise(40 + k % 3, 500 + k)} for k in range(12)]
    series.insert(7, {"id": "bad-middle", "values": [1, "x", 3]})
    series.append({"id": "bad-last", "values": [4, 4, 4, 4]})
    r = client.post(URL, json={"series": series, "detail": detail})
    assert r.status_code == 200
    answer = orjson.loads(r.data)
    assert orjson.dumps(answer) == r.data
    assert [res["id"] for res in answer["results"]] == [s["id"] for s in series]
    assert answer["summary"]["errors"] == 3 and answer["summary"]["series"] == len(series)
    assert list(answer) == (["detail", "results", "summary", "cautions", "full_report"] if detail == "brief"
                            else ["shared", "results", "summary"])
    assert int(r.headers["Content-Length"]) == len(r.data)

"""The Python API (lagsight.diagnose, lagsight.diagnose_many): the same answers and errors as the HTTP routes.

Every check here sends the same series and options both ways and compares the answers as JSON values; the data
are seeded random series (simulated, not a reference).
"""
from __future__ import annotations

import pickle
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

import lagsight
from lagsight import handling, tables
from lagsight.api import LIMITS, LagsightError

SINGLE = "/v1/diagnostics"
BATCH = "/v1/diagnostics/batch"


def _noise(n: int, seed: int) -> np.ndarray:
    return np.random.default_rng(seed).standard_normal(n)


def _ar1(n: int, phi: float, seed: int) -> np.ndarray:
    e = _noise(n, seed)
    x = np.empty(n)
    x[0] = e[0]
    for t in range(1, n):
        x[t] = phi * x[t - 1] + e[t]
    return x


# ------------------------------------------------------------------------------------------------ one series

SINGLE_CASES = [
    ({"values": _noise(120, 1).tolist()}, {}),
    ({"values": _ar1(150, 0.6, 2).tolist()}, {"period": 12, "max_lag": 30, "confidence": 0.9, "name": "depot 4"}),
    ({"values": _noise(80, 3).tolist()}, {"tests": ["ljung_box", "runs"], "band": "bartlett", "model_df": 2}),
    ({"values": (np.exp(_noise(90, 4)) + 5).tolist()}, {"transform": {"log": True, "difference": 1}}),
    ({"values": _noise(60, 5).tolist()}, {"p_values": "monte_carlo", "replicates": 199, "seed": 11}),
    ({"values": [10000001, 10000003, 10000002]}, {}),  # NIST StRD NumAcc1 values: the smallest series
    ({"values": [0.4, None, -0.2, 1.3, None, 0.8, -1.1, 0.3, 0.9, -0.6, 0.1, 1.2]}, {"missing": "interpolate"}),
    ({"values": _noise(40, 6).tolist()}, {"timestamps": [f"2021-{m:02d}-01" for m in range(1, 13)]
                                          + [f"2022-{m:02d}-01" for m in range(1, 13)]
                                          + [f"2023-{m:02d}-01" for m in range(1, 13)]
                                          + ["2024-01-01", "2024-02-01", "2024-03-01", "2024-04-01"]}),
]


@pytest.mark.parametrize("body,opts", SINGLE_CASES)
def test_diagnose_answers_what_the_single_route_answers(client, body, opts):
    http = client.post(SINGLE, json={**body, **opts})
    assert http.status_code == 200
    assert lagsight.diagnose(body["values"], **opts) == http.get_json()


def test_diagnose_takes_arrays_and_series_with_nan_for_missing(client):
    x = _noise(50, 7)
    x[[4, 20]] = np.nan
    http = client.post(SINGLE, json={"values": [None if np.isnan(v) else v for v in x.tolist()],
                                     "missing": "pairwise"}).get_json()
    assert lagsight.diagnose(x, missing="pairwise") == http
    assert lagsight.diagnose(pd.Series(x), missing="pairwise") == http
    assert lagsight.diagnose(pd.Series(x, dtype="Float64"), missing="pairwise") == http
    assert lagsight.diagnose(tuple(x.tolist()), missing="pairwise") == http


@pytest.mark.parametrize("index,texts", [
    (pd.date_range("2021-01-01", periods=48, freq="MS"), [f"{2021 + i // 12}-{i % 12 + 1:02d}-01" for i in range(48)]),
    (pd.date_range("2024-05-01 06:00", periods=72, freq="h"),
     [f"2024-05-{1 + (6 + i) // 24:02d}T{(6 + i) % 24:02d}:00:00" for i in range(72)]),
    (pd.period_range("2019Q1", periods=40, freq="Q"),
     [f"{2019 + i // 4}-{3 * (i % 4) + 1:02d}-01" for i in range(40)]),
])
def test_a_series_with_a_datetime_index_sends_its_stamps_and_name(client, index, texts):
    x = _noise(len(index), 8)
    http = client.post(SINGLE, json={"values": x.tolist(), "timestamps": texts, "name": "boiler 2"}).get_json()
    assert http["period"] is not None  # the stamps were read: they imply the seasonal period
    assert lagsight.diagnose(pd.Series(x, index=index, name="boiler 2")) == http
    renamed = client.post(SINGLE, json={"values": x.tolist(), "timestamps": texts, "name": "other"}).get_json()
    assert lagsight.diagnose(pd.Series(x, index=index, name="boiler 2"), name="other") == renamed


def test_irregular_stamps_are_sent_as_iso_text(client):
    """Irregular stamps are the report's labels as sent, so their text shows in the answer."""
    minutes = np.cumsum(np.random.default_rng(3).integers(1, 9, 40))
    index = pd.Timestamp("2024-05-01 06:00") + pd.to_timedelta(minutes, unit="min")
    texts = [f"2024-05-01T{6 + m // 60:02d}:{m % 60:02d}:00" for m in minutes.tolist()]
    x = _noise(40, 10)
    http = client.post(SINGLE, json={"values": x.tolist(), "timestamps": texts, "charts": True}).get_json()
    assert http["frequency"] is None and texts[0] in str(http["charts"]["time_plot"]["x"])
    assert lagsight.diagnose(pd.Series(x, index=index), charts=True) == http


def test_zoned_stamps_keep_their_offsets(client):
    index = pd.date_range("2024-03-30", periods=72, freq="h", tz="Europe/Paris")  # a daylight-saving change inside
    x = _noise(72, 9)
    texts = [t.isoformat() for t in index]
    assert texts[0] == "2024-03-30T00:00:00+01:00" and texts[-1] == "2024-04-02T00:00:00+02:00"
    http = client.post(SINGLE, json={"values": x.tolist(), "timestamps": texts}).get_json()
    assert lagsight.diagnose(pd.Series(x, index=index)) == http


BAD_SINGLE = [
    {"values": [1, 2, "x", 4]},
    {"values": [1.0, 2.0, 3.0], "confidence": 2},
    {"values": [1, 2, 3, 4], "colour": "red"},
    {"values": [3.0, 3.0, 3.0, 3.0]},
    {"values": [1.0, 2.0]},
    {"values": [1, 2, 3, 5], "model_df": 4},
    {"values": [1, None, 3, 5, 2, 4], "p_values": "monte_carlo"},
    {"values": [1, None, 3, 5, 2, 4]},
    {"values": _noise(30, 1).tolist(), "max_lag": 2001},
    {"values": [1, 3, 2], "timestamps": ["2024-01-02", "2024-01-01", "2024-01-03"]},
    {"values": [1, 3, 2], "timestamps": ["2024-01-01", "2024-01-02"]},
    {"values": [1, 3, 2, 5], "transform": {"box_cox": 9}},
    {"values": [1, 3, 2, 5], "tests": ["ljung_box", "ljung_box"]},
]


@pytest.mark.parametrize("body", BAD_SINGLE)
def test_errors_carry_the_problem_details_the_route_answers(client, body):
    http = client.post(SINGLE, json=body)
    assert http.status_code == 422
    values, opts = body["values"], {k: v for k, v in body.items() if k != "values"}
    with pytest.raises(LagsightError) as caught:
        lagsight.diagnose(values, **opts)
    error = caught.value
    assert isinstance(error, lagsight.problems.Problem)
    assert error.status == http.status_code and error.as_dict(SINGLE) == http.get_json()
    assert error.type == http.get_json()["type"] and error.title == http.get_json()["title"]
    assert all(e.pointer in str(error) for e in error.errors)


def test_infinity_is_refused_at_its_position():
    with pytest.raises(LagsightError) as caught:
        lagsight.diagnose(np.array([1.0, 2.0, np.inf, 3.0, 0.5]))
    assert [e.pointer for e in caught.value.errors] == ["/values/2"]


def test_limits_are_the_service_defaults_and_can_be_changed(client):
    x = _noise(200, 2).tolist()
    assert LIMITS["MAX_LAG"] == client.application.config["MAX_LAG"]
    with pytest.raises(LagsightError) as caught:
        lagsight.diagnose(x, max_lag=60, limits={"MAX_LAG": 50})
    assert [e.pointer for e in caught.value.errors] == ["/max_lag"] and caught.value.status == 422
    assert lagsight.diagnose(x, max_lag=60)["max_lag"] == 60
    with pytest.raises(TypeError, match="MAX_LAG"):
        lagsight.diagnose(x, limits={"MAX_LAGS": 5})


def test_an_error_survives_pickling_with_every_field():
    with pytest.raises(LagsightError) as caught:
        lagsight.diagnose([1, 2, "x", 4], confidence=2)
    copy = pickle.loads(pickle.dumps(caught.value))
    assert type(copy) is LagsightError and copy.as_dict() == caught.value.as_dict()


def test_the_view_calls_the_functions_the_api_calls():
    import lagsight.web.diagnostics as view

    assert view.load is handling.load and view.ready is handling.ready and view.SINGLE_LOAD is handling.SINGLE_LOAD


def test_importing_the_api_needs_neither_flask_nor_dask():
    code = ("import sys, lagsight; r = lagsight.diagnose([3.1, 2.7, 3.4, 2.9, 3.3, 2.8]); "
            "import lagsight.distributed; "
            "print(sorted(m for m in ('flask', 'werkzeug', 'dask', 'distributed') if m in sys.modules))")
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr[-2000:]
    assert run.stdout.strip() == "[]"


# ------------------------------------------------------------------------------------------------ many series

def _long_frame() -> tuple[pd.DataFrame, dict]:
    """A long table of invented store series (seeded) with the items a batch body would hold for each id."""
    days = pd.date_range("2024-01-01", periods=90, freq="D")
    specs = {
        "store-01": _noise(90, 1),
        "store-02": _ar1(90, 0.7, 2),
        "store-03": np.full(90, 4.0),  # constant: an error for this series alone
        "store-04": _noise(60, 4),  # shorter
        "store-05": np.where(np.arange(90) == 30, np.nan, _noise(90, 5)),  # a missing value (refused by default)
        "store-06": _ar1(90, -0.5, 6),
        "store-07": _noise(2, 7),  # too short
    }
    specs.update({f"store-{k:02d}": _noise(90, k) for k in range(8, 30)})
    rows = [pd.DataFrame({"store": key, "day": days[:len(x)], "sales": x}) for key, x in specs.items()]
    frame = pd.concat(rows, ignore_index=True).sample(frac=1.0, random_state=3).reset_index(drop=True)
    return frame, specs


def _items(frame: pd.DataFrame, specs: dict) -> list[dict]:
    out = []
    for key in pd.unique(frame["store"]):  # in order of each id's first row
        x = specs[key]
        out.append({"id": key, "values": [None if np.isnan(v) else v for v in x.tolist()],
                    "timestamps": [f"{d:%Y-%m-%d}" for d in pd.date_range("2024-01-01", periods=len(x), freq="D")]})
    return out


def _with_instance(answer: dict) -> dict:
    for result in answer["results"]:
        if "error" in result:
            assert result["error"]["instance"] is None
            result["error"]["instance"] = BATCH
    return answer


def _expected_rows(answer: dict) -> pd.DataFrame:
    """The table's columns read off the batch route's answer, field by field."""
    rows = []
    q = answer["summary"]["false_discovery"]["q_values"]
    for result, qi in zip(answer["results"], q):
        if "error" in result:
            details = [e["detail"] for e in result["error"]["errors"]]
            rows.append({"id": result["id"], "error": details})
            continue
        verdict = result["verdict"]
        ljung = [t for t in result["tests"] if t["name"] == "ljung_box"]
        rows.append({"id": result["id"], "n": result["n"], "white_noise": verdict["white_noise"],
                     "p_value": verdict["p_value"], "tail_p_value": verdict["tail_p_value"],
                     "structure": (verdict["structure"] or [None])[0],
                     "advice": result["advice"][0]["code"] if result.get("advice") else None,
                     "ljung_box_lag": min(t["lag"] for t in ljung), "ljung_box_p": ljung[0]["p_value"],
                     "q_value": qi})
    return rows


def _assert_table_matches(table: pd.DataFrame, answer: dict) -> None:
    assert list(table.columns) == list(tables.TABLE)
    for (_, got), want in zip(table.iterrows(), _expected_rows(answer), strict=True):
        assert got["id"] == want["id"]
        if "error" in want:
            assert pd.isna(got["n"]) and pd.isna(got["q_value"]) and pd.isna(got["white_noise"])
            assert all(detail in got["error"] for detail in want["error"])
            continue
        assert pd.isna(got["error"])
        for key, value in want.items():
            assert (pd.isna(got[key]) if value is None else got[key] == value), key


@pytest.mark.parametrize("opts", [{}, {"detail": "brief"}, {"max_lag": 14, "confidence": 0.9, "period": 7},
                                  {"missing": "interpolate", "tests": ["ljung_box", "mcleod_li"]},
                                  {"p_values": "monte_carlo", "replicates": 99, "seed": 5}])
def test_diagnose_many_answers_what_the_batch_route_answers(client, opts):
    frame, specs = _long_frame()
    http = client.post(BATCH, json={"series": _items(frame, specs), **opts})
    assert http.status_code == 200
    table, answer = lagsight.diagnose_many(frame, id="store", time="day", value="sales", reports=True, **opts)
    assert _with_instance(answer) == http.get_json()
    assert answer["summary"]["errors"] >= (1 if opts.get("missing") else 2)
    _assert_table_matches(table, answer)
    alone = lagsight.diagnose_many(frame, id="store", time="day", value="sales", **opts)
    pd.testing.assert_frame_equal(alone, table)


def test_integer_ids_a_number_time_column_and_frame_order(client):
    rng = np.random.default_rng(4)
    x = {7: rng.standard_normal(40), 3: rng.standard_normal(55), 12: rng.standard_normal(40)}
    frame = pd.concat([pd.DataFrame({"id": k, "t": np.arange(len(v)) * 2.5, "value": v}) for k, v in x.items()])
    shuffled = frame.sample(frac=1.0, random_state=1)
    first = [int(k) for k in pd.unique(shuffled["id"])]
    http = client.post(BATCH, json={"series": [{"id": k, "values": x[k].tolist()} for k in first]}).get_json()
    table, answer = lagsight.diagnose_many(shuffled, time="t", reports=True)
    assert answer == http and table["id"].tolist() == first and table["id"].dtype == np.int64
    # time=None: each series' rows in the frame's order
    in_order, _ = lagsight.diagnose_many(frame, time=None, reports=True)
    assert in_order["id"].tolist() == [7, 3, 12]
    pd.testing.assert_frame_equal(in_order.set_index("id").loc[first].reset_index(), table)


def test_an_invalid_shared_option_refuses_the_whole_batch_as_the_route_does(client):
    frame, specs = _long_frame()
    for opts in ({"confidence": 1.5}, {"detail": "some"}, {"max_lag": 5000}, {"colour": "red"}):
        http = client.post(BATCH, json={"series": _items(frame, specs), **opts})
        with pytest.raises(LagsightError) as caught:
            lagsight.diagnose_many(frame, id="store", time="day", value="sales", **opts)
        assert caught.value.as_dict(BATCH) == http.get_json() and caught.value.status == http.status_code == 422
    with pytest.raises(LagsightError) as caught:
        lagsight.diagnose_many(frame.iloc[:0], id="store", time="day", value="sales")
    assert [e.pointer for e in caught.value.errors] == ["/series"]
    with pytest.raises(ValueError, match="no value column"):
        lagsight.diagnose_many(frame, id="store", time="day")


def test_series_past_one_chunk_keep_their_positions_and_the_q_values_span_them(monkeypatch, client):
    import lagsight.api as api

    frame, specs = _long_frame()
    whole, answer = lagsight.diagnose_many(frame, id="store", time="day", value="sales", reports=True)
    monkeypatch.setattr(api, "CHUNK", 4)
    chunked, parts = lagsight.diagnose_many(frame, id="store", time="day", value="sales", reports=True)
    pd.testing.assert_frame_equal(chunked, whole)
    assert parts["summary"]["false_discovery"] == answer["summary"]["false_discovery"]
    pointers = [r["error"]["errors"][0]["pointer"] for r in parts["results"] if "error" in r]
    assert pointers == [r["error"]["errors"][0]["pointer"] for r in answer["results"] if "error" in r]


def test_the_shared_item_preparation_matches_the_batch_view(app):
    """web/batch.py prepares items with handling's own functions (no copy of its own)."""
    import lagsight.web.batch as view

    assert view.prepare_items is handling.prepare_items and view.ITEM_LOAD is handling.ITEM_LOAD

    frame, specs = _long_frame()
    raw = _items(frame, specs) + [{"id": "store-01", "values": [1, 2, 3, 5]}, {"id": True, "values": [1, 2]},
                                  [1, 2, 3], {"id": "p", "values": _noise(20, 1).tolist(), "period": 30},
                                  {"id": "plain", "values": _noise(90, 40).tolist(), "name": "n"}]
    shared = handling.batch_options({"series": raw, "max_lag": 12}, app.config)
    shared.pop("series")
    for fast in (True, False):
        got = handling.prepare_items(raw, shared, app.config, fast=fast, instance=BATCH)
        want = view.prepare_items(raw, shared, app.config, fast=fast, instance=BATCH)
        assert got[1] == want[1] and got[2] == want[2]
        for (s, plan), (w, wplan) in zip(got[0], want[0], strict=True):
            assert plan == wplan and np.array_equal(s.values, w.values, equal_nan=True)
            assert (s.n_input, s.period, s.frequency, s.labels, s.warnings) == \
                   (w.n_input, w.period, w.frequency, w.labels, w.warnings)


def test_the_readme_python_block_runs(capsys):
    from pathlib import Path

    text = (Path(__file__).resolve().parents[1] / "README.md").read_text()
    block = text.split("<!-- example: readme-python", 1)[1].split("```python\n", 1)[1].split("```", 1)[0]
    exec(compile(block, "README.md", "exec"), {})
    out = capsys.readouterr().out
    assert "white noise" in out.lower() and "harbour" in out
    assert "422 /values The series is constant" in out


# ------------------------------------------------------------------- the routes that follow a diagnosis

FOLLOW_UP_CASES = [
    ("model_check", "/v1/model-check", {"order": [1, 0, 0]}, {}),
    ("model_check", "/v1/model-check", {"order": "suggested"}, {"period": 12, "confidence": 0.9}),
    ("model_check", "/v1/model-check", {"order": [0, 1, 1]}, {"seasonal_order": [0, 1, 1, 12], "name": "depot 4"}),
    ("driver_check", "/v1/driver-check", {"drivers": [{"name": "price", "values": _noise(150, 8).tolist()}]}, {}),
    ("driver_check", "/v1/driver-check", {"drivers": [{"name": "price", "values": _ar1(150, 0.5, 9).tolist()},
                                                      {"name": "staff", "values": _noise(150, 10).tolist()}]},
     {"max_lag": 8, "confidence": 0.9}),
    ("stability", "/v1/stability", {"window": 50}, {}),
    ("stability", "/v1/stability", {"window": 40}, {"step": 10, "max_lag": 12, "model_df": 1}),
]


@pytest.mark.parametrize("name,route,required,opts", FOLLOW_UP_CASES)
def test_the_follow_up_functions_answer_what_their_routes_answer(client, name, route, required, opts):
    values = _ar1(150, 0.5, 7).tolist()
    r = client.post(route, json={"values": values, **required, **opts})
    assert r.status_code == 200, r.get_json()
    assert getattr(lagsight, name)(values, **required, **opts) == r.get_json()


FOLLOW_UP_ERRORS = [  # mismatched lengths, a window larger than the series, a model that does not converge
    ("driver_check", "/v1/driver-check", {"values": _noise(60, 1).tolist(), "drivers": [
        {"name": "a", "values": _noise(60, 2).tolist(), "timestamps": ["2024-01-01"]}]}),
    ("stability", "/v1/stability", {"values": _noise(60, 1).tolist(), "window": 80}),
    ("model_check", "/v1/model-check", {"values": _noise(12, 1).tolist(), "order": [2, 0, 2],
                                        "trend": "constant_linear"}),
    ("model_check", "/v1/model-check", {"values": _noise(60, 1).tolist(), "order": [1, 0, 0], "model_df": 1}),
]


@pytest.mark.parametrize("name,route,body", FOLLOW_UP_ERRORS)
def test_follow_up_errors_carry_the_problem_details_the_route_answers(client, name, route, body):
    r = client.post(route, json=body)
    assert r.status_code == 422
    values = body.pop("values")
    with pytest.raises(LagsightError) as caught:
        getattr(lagsight, name)(values, **body)
    answered = r.get_json()
    assert caught.value.as_dict() == {k: v for k, v in answered.items() if k != "instance"} | {"instance": None}


def test_a_driver_series_with_a_datetime_index_sends_its_stamps(client):
    days = pd.date_range("2025-03-01", periods=150, freq="D")
    y = pd.Series(_ar1(150, 0.4, 3), index=days, name="bakery")
    price = pd.Series(_noise(120, 4), index=days[30:])
    got = lagsight.driver_check(y, drivers={"price": price})
    stamps = [d.strftime("%Y-%m-%d") for d in days]
    http = client.post("/v1/driver-check", json={"values": y.tolist(), "timestamps": stamps, "name": "bakery",
                                                 "drivers": [{"name": "price", "values": price.tolist(),
                                                              "timestamps": stamps[30:]}]}).get_json()
    assert got == http and got["drivers"][0]["n"] == 120


def test_the_follow_up_views_call_the_functions_the_api_calls():
    import inspect

    import lagsight.web.drivers as drivers
    import lagsight.web.model_check as model_check
    import lagsight.web.stability as stability

    for view, function in ((model_check.model_check, "model_check"), (drivers.driver_check, "driver_check"),
                           (stability.stability, "stability")):
        assert f"follow_up.{function}(" in inspect.getsource(view)

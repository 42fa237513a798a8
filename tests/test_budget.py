"""Bounded work: a request over the cost budget is refused before any analysis, and a request that runs past
its deadline ends with a 503 problem (or, in an NDJSON stream, one error line per series not done), logged
with its request id and counted. Data are seeded random series (a sine added where a seasonal pattern is
needed), not references."""
from __future__ import annotations

import io
import json
import logging
import re

import numpy as np
import orjson
import pytest

from lagsight import config, create_app
from lagsight.engine import trend
from lagsight.web import budget
from lagsight.web.observability import JsonFormatter

from .live_server import live_gunicorn
from .spec_tools import assert_valid

BATCH = "/v1/diagnostics/batch"
NDJSON = "application/x-ndjson"



def _estimate(body: dict, detail: str):
    """A batch body's prepared series and their engine work as web/budget.py estimates it (no analysis)."""
    from lagsight.inputs.schema import BatchRequest
    from lagsight.web.batch import prepare_items

    app = create_app({"TESTING": True})
    with app.test_request_context(BATCH, method="POST"):
        shared = BatchRequest().load(body)
        prepared, _, _ = prepare_items(shared.pop("series"), shared, app.config)
        return prepared, budget.engine_work(budget.Estimate(), prepared, detail)

def _seasonal(n: int, period: int, seed: int) -> list[float]:
    rng = np.random.default_rng(seed)
    return np.round(rng.standard_normal(n) + 3 * np.sin(2 * np.pi * np.arange(n) / period), 4).tolist()


def _noise(n: int, seed: int) -> list[float]:
    return np.round(np.random.default_rng(seed).standard_normal(n), 4).tolist()


def _counter(client, name: str, labels: str = "") -> float:
    text = client.get("/metrics").get_data(as_text=True)
    found = re.search(rf"^{name}{re.escape(labels)} (\S+)$", text, re.M)
    return float(found.group(1)) if found else 0.0


@pytest.fixture
def log_lines():
    stream = io.StringIO()
    handler = logging.StreamHandler(stream)
    handler.setFormatter(JsonFormatter())
    logger = logging.getLogger("lagsight")
    logger.addHandler(handler)
    yield lambda: [json.loads(line) for line in stream.getvalue().splitlines()]
    logger.removeHandler(handler)


def _problem(r, status: int) -> dict:
    assert r.status_code == status, (r.status_code, r.get_data()[:400])
    assert r.content_type == "application/problem+json"
    problem = r.get_json()
    assert_valid(problem, "Problem")
    return problem


def test_many_lengths_with_a_long_period_are_refused_before_any_analysis(log_lines):
    """150 lengths with period 1,000 and max_lag 1,000 under a budget of 1,000 units: refused before any analysis,
    the request logged and counted, the largest part named with what to change."""
    client = create_app({"TESTING": True, "MAX_COST": 1000}).test_client()
    body = {"period": 1000, "series": [{"id": f"depot-{i}", "values": _seasonal(2001 + i, 1000, i)}
                                       for i in range(150)]}
    before = _counter(client, "lagsight_series_analysed_total")
    r = client.post(BATCH, json=body, headers={"X-Request-ID": "costly-1"})
    problem = _problem(r, 413)
    assert problem["type"] == "urn:lagsight:problem:payload-too-large"
    assert "over this deployment's budget of 1,000 (LAGSIGHT_MAX_COST" in problem["detail"]
    cost = int(re.search(r"would cost about ([\d,]+) units", problem["detail"]).group(1).replace(",", ""))
    assert cost > 1000
    assert "Most of it is seasonal decompositions" in problem["detail"]
    assert "150 distinct pairs of series length and period" in problem["detail"]
    assert budget._ADVICE["seasonal decompositions"] in problem["detail"]  # what to change
    assert [e["pointer"] for e in problem["errors"]] == ["/series"]
    assert _counter(client, "lagsight_series_analysed_total") == before  # nothing analysed
    refused = [e for e in log_lines() if e["message"] == "request over the cost budget"]
    assert refused and refused[0]["request_id"] == "costly-1" and refused[0]["cost"] == cost


def test_many_lengths_with_a_long_period_fit_the_default_budget():
    """The same 150 lengths share one loess table per window, one joint decomposition per chunk and one set of
    null draws for their verdict tables (one per short lag, 30 of them): within the default budget of 20,000;
    before, one table per length and per short lag cost about 30,000 units. Their estimate, not their run."""
    body = {"period": 1000, "series": [{"id": i, "values": _seasonal(2001 + i, 1000, i)} for i in range(150)]}
    prepared, estimate = _estimate(body, "full")
    assert estimate.total < 20_000
    assert estimate.parts.get("verdict null tables", 0.0) == 0.0  # one set of draws: the request's warm-up


def test_the_seasonal_decompositions_of_many_lengths_share_their_tables():
    """The loess tables of a period serve every length its windows are shorter than (engine/stl.py), and the
    lengths of a chunk are decomposed together: 150 lengths with period 1,000 count one table, one joint
    decomposition per chunk, and each block's and series' own work."""
    body = {"period": 1000, "series": [{"id": i, "values": _seasonal(2001 + i, 1000, i)} for i in range(150)]}
    from lagsight.engine import stl
    from lagsight.pipeline import blocks, chunks

    prepared, estimate = _estimate(body, "brief")
    trend = stl.windows(1000)[0]
    assert trend < 2001 and trend >= stl.FFT_MIN_WIDTH and (2001 - trend) * trend >= stl.FFT_MIN_WORK
    count = len(chunks(blocks(prepared)))
    points = sum(2001 + i for i in range(150))
    expected = (budget.STL_TABLES + budget.STL_TABLES_W2 * trend ** 2
                + count * (budget.STL_CALL + budget.STL_CALL_W2 * trend ** 2)
                + 150 * (budget.STL_GROUP + budget.STL_SERIES_W2 * trend ** 2) + budget.STL_POINT * points)
    assert estimate.parts["seasonal decompositions"] == pytest.approx(expected)
    assert estimate.notes["seasonal decompositions"].startswith("150 distinct pairs of series length and period")


@pytest.mark.parametrize("body,part", [
    ({"transform": {"box_cox": "estimate"}, "series": [
        {"id": i, "values": np.exp(_noise(300, i)).tolist()} for i in range(200)]}, "Box-Cox estimates"),
    ({"max_lag": 2000, "series": [{"id": i, "values": _noise(5000, i)} for i in range(10)]}, "lags"),
    ({"series": [{"id": i, "values": _noise(400 + i, i)} for i in range(100)]}, "engine passes"),  # one null table
    ({"p_values": "monte_carlo", "replicates": 999, "series": [{"id": 0, "values": _noise(3000, 1)}]},
     "Monte Carlo p-values"),
])
def test_the_largest_part_of_the_cost_is_named_with_what_to_change(body, part):
    client = create_app({"TESTING": True, "MAX_COST": 100}).test_client()
    problem = _problem(client.post(BATCH, json=body), 413)
    assert f"Most of it is {part}" in problem["detail"] and "budget of 100 " in problem["detail"]
    assert budget._ADVICE[part] in problem["detail"]


def test_the_single_route_is_held_to_the_budget_too():
    client = create_app({"TESTING": True, "MAX_COST": 100}).test_client()
    body = {"values": _noise(3000, 2), "p_values": "monte_carlo", "replicates": 999}
    problem = _problem(client.post("/v1/diagnostics", json=body), 413)
    assert "Monte Carlo p-values" in problem["detail"] and [e["pointer"] for e in problem["errors"]] == [""]
    assert client.post("/v1/diagnostics", json={"values": _noise(3000, 2)}).status_code == 200


def test_the_estimate_follows_the_model():
    """The estimate of a plain batch is the sum of its parts as web/budget.py states them."""
    body = {"series": [{"id": i, "values": _noise(200, i)} for i in range(10)], "max_lag": 20}
    prepared, estimate = _estimate(body, "full")
    per_series = budget.SERIES + budget.POINT * 200 + budget.FULL_SERIES + budget.FULL_POINT * 200
    assert estimate.parts["engine passes"] == pytest.approx(budget.PASS)
    assert estimate.parts["series and points"] == pytest.approx(10 * per_series)
    assert estimate.parts["lags"] == pytest.approx((budget.PASS_LAG + budget.PASS_LAG_BLOCK) * 20
                                                   + budget.SERIES_LAG2 * 400 * 10)
    k = trend.adf_trend_lags(200) + 3  # the ADF regressors with a trend
    mechanism = budget.MECH_SERIES + budget.MECH_POINT * 200 + budget.MECH_POINT_K2 * 200 * k * k
    assert estimate.parts["mechanism checks"] == pytest.approx(10 * mechanism)
    assert "seasonal decompositions" not in estimate.parts


def _late_app(deadline: float):
    return create_app({"TESTING": True, "REQUEST_DEADLINE": deadline})


#: Several engine passes (chunks of pipeline.BLOCK_POINTS values: 150 lengths of about 2,000 values make two)
#: of well over 0.2 s each: the work outlasts a short deadline.
SLOW_BATCH = {"max_lag": 300, "detail": "brief",
              "series": [{"id": f"meter-{i}", "values": _noise(2000 + i, i)} for i in range(150)]}


def test_a_late_batch_ends_with_a_503_logged_and_counted(log_lines):
    client = _late_app(0.2).test_client()
    stopped = _counter(client, "lagsight_requests_stopped_total", '{by="deadline"}')
    analysed = _counter(client, "lagsight_series_analysed_total")
    r = client.post(BATCH, json=SLOW_BATCH, headers={"X-Request-ID": "late-batch-1"})
    problem = _problem(r, 503)
    assert problem["type"] == "urn:lagsight:problem:unavailable"
    assert "deadline of 0.2 s (LAGSIGHT_REQUEST_DEADLINE)" in problem["detail"] and "of 150 series" in problem["detail"]
    assert r.headers["X-Request-ID"] == "late-batch-1"
    assert _counter(client, "lagsight_requests_stopped_total", '{by="deadline"}') == stopped + 1
    assert _counter(client, "lagsight_series_analysed_total") < analysed + 150  # stopped before the end
    late = [e for e in log_lines() if e["message"] == "request stopped at its deadline"]
    assert len(late) == 1 and late[0]["request_id"] == "late-batch-1" and late[0]["series_not_done"] > 0


def test_a_late_stream_sends_one_error_line_per_series_not_done():
    client = _late_app(0.2).test_client()
    body = {**SLOW_BATCH, "series": [{"id": "bad", "values": [1, 2]}] + SLOW_BATCH["series"]}
    r = client.post(BATCH, json=body, headers={"Accept": NDJSON})
    assert r.status_code == 200 and r.mimetype == NDJSON
    lines = [orjson.loads(line) for line in r.get_data().splitlines()]
    assert lines[-1]["kind"] == "summary"
    results = [line for line in lines if line["kind"] == "result"]
    late = [line for line in results if "error" in line and line["error"]["status"] == 503]
    assert late and all("LAGSIGHT_REQUEST_DEADLINE" in line["error"]["detail"] for line in late)
    assert [line["index"] for line in results] == list(range(151))  # in request order, the late ones too
    assert lines[-1]["summary"]["errors"] == len(late) + 1 and lines[-1]["summary"]["series"] == 151


def test_a_single_request_past_its_deadline_before_the_engine_is_a_503():
    client = _late_app(1e-6).test_client()  # reading the body alone takes longer
    problem = _problem(client.post("/v1/diagnostics", json={"values": _noise(500, 3)}), 503)
    assert "1 of 1 series not analysed" in problem["detail"]


def test_the_deadline_defaults_to_half_the_timeout_and_stays_below_it():
    assert config.load(environ={})["REQUEST_DEADLINE"] == 30.0
    assert config.load(environ={"LAGSIGHT_TIMEOUT": "120"})["REQUEST_DEADLINE"] == 60.0
    assert config.load(environ={"LAGSIGHT_REQUEST_DEADLINE": "12.5"})["REQUEST_DEADLINE"] == 12.5
    for raw in ("60", "90", "0", "-1", "inf", "soon"):
        with pytest.raises(ValueError, match="LAGSIGHT_REQUEST_DEADLINE"):
            config.load(environ={"LAGSIGHT_REQUEST_DEADLINE": raw})
    assert config.load(environ={"LAGSIGHT_MAX_COST": "500"})["MAX_COST"] == 500


def test_methods_lists_the_budget_and_the_deadline():
    limits = create_app({"TESTING": True}).test_client().get("/v1/methods").get_json()["limits"]
    assert limits["max_cost"] == 20_000 and limits["request_deadline_seconds"] == 30.0
    assert "seasonal decomposition" in limits["cost"] and "a single pass runs to its end" in limits["deadline"]


@pytest.mark.slow
def test_a_late_request_through_gunicorn_is_answered_logged_and_counted(tmp_path):
    """Through a live gunicorn: a late JSON batch is a 503 problem, a late NDJSON stream ends with error lines
    and its summary; both are logged with their request ids and counted."""
    import requests

    with live_gunicorn(tmp_path, env={"LAGSIGHT_REQUEST_DEADLINE": "0.2"}) as base:
        late = requests.post(base + BATCH, json=SLOW_BATCH, headers={"X-Request-ID": "late-json"}, timeout=60)
        stream = requests.post(base + BATCH, json=SLOW_BATCH, headers={"X-Request-ID": "late-ndjson",
                                                                        "Accept": NDJSON}, timeout=60)
        metrics_text = requests.get(base + "/metrics", timeout=30).text
    assert late.status_code == 503 and late.headers["Content-Type"] == "application/problem+json"
    assert late.headers["X-Request-ID"] == "late-json" and late.json()["type"] == "urn:lagsight:problem:unavailable"
    lines = [orjson.loads(line) for line in stream.content.splitlines()]
    assert stream.status_code == 200 and lines[-1]["kind"] == "summary"
    assert sorted(line["index"] for line in lines if line["kind"] == "result") == list(range(150))
    assert any(line.get("error", {}).get("status") == 503 for line in lines)
    assert re.search(r'^lagsight_requests_stopped_total\{by="deadline"\} 2\.0$', metrics_text, re.M)
    entries = [json.loads(line) for p in tmp_path.glob("gunicorn-*.log") for line in p.read_text().splitlines()
               if line.startswith("{")]
    stopped = {e["request_id"] for e in entries if e["message"] == "request stopped at its deadline"}
    assert stopped == {"late-json", "late-ndjson"}


# --------------------------------------------------- the routes that follow a diagnosis: same budget and deadline

FOLLOW_UP = [  # (route, body, the part named, the pointer)
    ("/v1/model-check", {"values": _noise(3000, 4), "order": [3, 0, 3]}, "model fits", "/order"),
    ("/v1/model-check", {"values": _noise(300, 4), "order": "suggested"}, "model fits", "/order"),
    ("/v1/driver-check", {"values": _noise(3000, 5), "drivers": [{"name": f"d{i}", "values": _noise(3000, 6 + i)}
                                                                  for i in range(3)]}, "drivers", "/drivers"),
    ("/v1/stability", {"values": _noise(20000, 7), "window": 40, "step": 20}, "windows", "/window"),
]


@pytest.mark.parametrize("route,body,part,pointer", FOLLOW_UP)
def test_the_follow_up_routes_are_held_to_the_budget(route, body, part, pointer):
    client = create_app({"TESTING": True, "MAX_COST": 100}).test_client()
    fits = _counter(client, "lagsight_models_fitted_total")
    problem = _problem(client.post(route, json=body), 413)
    assert f"Most of it is {part}" in problem["detail"] and "budget of 100 (LAGSIGHT_MAX_COST" in problem["detail"]
    assert "Nothing was analysed; to fit, " in problem["detail"]
    assert [e["pointer"] for e in problem["errors"]] == [pointer]
    assert _counter(client, "lagsight_models_fitted_total") == fits  # refused before any fit


def test_the_follow_up_estimates_follow_the_model():
    """A model check: one fit at 12 microseconds a unit of engine.arima.cost plus two full reports; a driver check:
    a fixed cost and a cost per paired value per driver; a stability request: each window as a series, plus its own
    cost."""
    from lagsight.engine.arima import Order, cost

    app = create_app({"TESTING": True, "MAX_COST": 10**9})
    seen = []
    real = budget.check
    budget.check = lambda estimate, pointer: seen.append(estimate)
    try:
        client = app.test_client()
        client.post("/v1/model-check", json={"values": _noise(500, 1), "order": [1, 0, 1]})
        client.post("/v1/driver-check", json={"values": _noise(200, 1), "drivers": [{"name": "a", "values": _noise(150, 2)}]})
        client.post("/v1/stability", json={"values": _noise(1000, 1), "window": 100})
    finally:
        budget.check = real
    model, drivers, windows = seen
    assert model.parts["model fits"] == pytest.approx(budget.FIT_SMALL_UNIT * cost(Order(1, 0, 1, 0, 0, 0, 0, "c"), 500))
    assert drivers.total == pytest.approx(budget.DRIVER + budget.DRIVER_POINT * 150)
    per_window = (budget.SERIES + budget.FULL_SERIES + (budget.POINT + budget.FULL_POINT) * 100
                  + budget.SERIES_LAG2 * 20 * 20 + budget.WINDOW)
    assert windows.parts["windows"] == pytest.approx(budget.PASS + budget.PASS_LAG * 20 + 19 * per_window)


@pytest.mark.parametrize("route,body,unit", [
    ("/v1/model-check", {"values": _noise(300, 3), "order": [1, 0, 0]}, "2 of 2 series"),
    ("/v1/driver-check", {"values": _noise(300, 3), "drivers": [{"name": "a", "values": _noise(300, 4)}]},
     "1 of 1 drivers"),
    ("/v1/stability", {"values": _noise(600, 3), "window": 60}, "19 of 19 windows"),
])
def test_a_follow_up_request_past_its_deadline_is_a_503_counted(route, body, unit, log_lines):
    client = _late_app(1e-6).test_client()  # reading the body alone takes longer
    stopped = _counter(client, "lagsight_requests_stopped_total", '{by="deadline"}')
    problem = _problem(client.post(route, json=body, headers={"X-Request-ID": "late-follow-up"}), 503)
    assert f"{unit}" in problem["detail"] and "LAGSIGHT_REQUEST_DEADLINE" in problem["detail"]
    assert _counter(client, "lagsight_requests_stopped_total", '{by="deadline"}') == stopped + 1
    assert any(e["message"] == "request stopped at its deadline" and e["request_id"] == "late-follow-up"
               for e in log_lines())

"""Every demo payload reaches the conclusion its sidecar states.

The payloads are invented scenarios simulated by demo_payloads/generate.py (seeded). The
checks are on facts that follow from how each series was simulated (which lags stand out,
whether the verdict is white noise), not on the wording of sentences.
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_payloads"

#: Features a payload may declare in its sidecar's "requires".
FEATURES = {"batch", "missing", "csv", "mcleod_li", "model_check", "stability", "driver_check", "horizon"}

#: Features a payload may need that are not in the service yet -> why the test is expected to fail.
#: Remove an entry when the feature lands; the strict xfail turns into a failure until you do.
PENDING = {
}


#: Payloads whose stated conclusion the service does not reach yet, for a reason other than a missing feature.
#: Remove an entry when the cause is settled; the strict xfail turns into a failure until you do.
KNOWN: dict[str, str] = {}


def _sidecars() -> list[Path]:
    return sorted(DEMO.glob("*.expect.json"))


def _cases():
    for path in _sidecars():
        side = json.loads(path.read_text())
        pending = [PENDING[r] for r in side["requires"] if r in PENDING]
        known = KNOWN.get(path.name.removesuffix(".expect.json"))
        pending += [known] if known else []
        marks = [pytest.mark.xfail(strict=True, reason="; ".join(pending))] if pending else []
        yield pytest.param(path, id=path.name.removesuffix(".expect.json"), marks=marks)


def send(client, side: dict):
    """Post a payload the way its sidecar says and return the response."""
    body = (DEMO / side["payload"]).read_bytes()
    send = side["send"]
    return client.post(send["endpoint"], data=body, content_type=send["content_type"],
                       query_string=send["query"])


def check_report(report: dict, expect: dict) -> None:
    """Assert the expectation keys documented in demo_payloads/generate.py."""
    if "n" in expect:
        assert report["n"] == expect["n"]
    if "n_missing_at_least" in expect:
        assert report["n_missing"] >= expect["n_missing_at_least"]
    if "period" in expect:
        assert report["period"] == expect["period"]
    if "horizon" in expect:
        assert report["horizon"] == expect["horizon"]
    if "period_source" in expect:
        assert report["seasonal"]["period_source"] == expect["period_source"]
    if "white_noise" in expect:
        assert report["verdict"]["white_noise"] is expect["white_noise"], report["verdict"]["summary"]
    outside = set(report["acf"]["outside"])
    if "acf_outside_includes" in expect:
        assert set(expect["acf_outside_includes"]) <= outside, sorted(outside)
    if "acf_outside_at_most" in expect:
        assert len(outside) <= expect["acf_outside_at_most"], sorted(outside)
    if "pacf_outside_includes" in expect:
        assert set(expect["pacf_outside_includes"]) <= set(report["pacf"]["outside"])
    seasonal = {e["lag"]: e["outside"] for e in report["seasonal"]["lags"]}
    for lag in expect.get("seasonal_outside", []):
        assert seasonal.get(lag) is True, seasonal
    for lag in expect.get("seasonal_inside", []):
        assert seasonal.get(lag) is False, seasonal
    if "ljung_box_rejects_at_max_lag" in expect:
        at_max = [t for t in report["tests"] if t["name"] == "ljung_box" and t["lag"] == report["max_lag"]]
        assert at_max and at_max[0]["reject"] is expect["ljung_box_rejects_at_max_lag"]
    for name, rejects in expect.get("test_rejects", {}).items():
        results = [t["reject"] for t in report["tests"] if t["name"] == name]
        assert results, f"no {name} test in the report"
        assert any(results) is rejects, (name, results)
    for word in expect.get("cautions_mention", []):
        assert any(word.lower() in c.lower() for c in report["cautions"]), report["cautions"]


def check_batch(body: dict, expect: dict) -> None:
    results = body["results"]
    assert len(results) == expect["count"]
    by_id = {r["id"]: r for r in results}
    errors = {i for i, r in by_id.items() if r.get("error") is not None}
    assert errors == set(expect["error_ids"])
    for i in expect["error_ids"]:
        problem = by_id[i]["error"]
        assert problem["status"] == 422 and problem["type"].startswith("urn:lagsight:problem:")
    flagged = {i for i, r in by_id.items() if i not in errors and r["verdict"]["white_noise"] is False}
    planted = set(expect["not_white_noise_includes"])
    assert planted <= flagged, sorted(planted - flagged)
    clean = set(by_id) - planted - errors
    assert len(flagged & clean) <= expect["max_false_alarm_share"] * len(clean)


def check_model_check(body: dict, expect: dict) -> None:
    """The fitted model and the before/after reading of POST /v1/model-check."""
    comparison = body["comparison"]
    if "model" in expect:
        assert body["model"]["label"] == expect["model"], body["search"]
    if "before_white_noise" in expect:
        assert comparison["before"]["white_noise"] is expect["before_white_noise"]
    if "residuals_white_noise" in expect:
        assert body["residuals"]["verdict"]["white_noise"] is expect["residuals_white_noise"]
    if "structure_removed" in expect:
        assert comparison["structure_removed"] is expect["structure_removed"], comparison["sentence"]


def check_stability(body: dict, expect: dict) -> None:
    """The windows and the change reading of POST /v1/stability."""
    if "structure_change_near" in expect:
        near = [c["index"] for c in body["changes"]["found"] or [] if c["kind"] == "structure"]
        assert any(abs(i - expect["structure_change_near"]) <= expect["within"] for i in near), body["reading"]
    if "first_window_white_noise" in expect:
        assert body["windows"][0]["white_noise"] is expect["first_window_white_noise"]
    if "last_window_white_noise" in expect:
        assert body["windows"][-1]["white_noise"] is expect["last_window_white_noise"]


def check_driver_check(body: dict, expect: dict) -> None:
    """The judgement and key lags of each driver named in POST /v1/driver-check's expectations."""
    by_name = {d["name"]: d for d in body["drivers"]}
    for name, lags in expect.get("linked", {}).items():
        assert by_name[name]["moves_with_series"] is True, by_name[name]["reading"]
        assert set(lags) <= set(by_name[name]["key_lags"]), by_name[name]["key_lags"]
    for name in expect.get("not_linked", []):
        assert by_name[name]["moves_with_series"] is False, by_name[name]["reading"]


def test_there_are_at_least_eight_payloads_each_with_a_sidecar():
    sidecars = _sidecars()
    assert len(sidecars) >= 8
    for path in sidecars:
        side = json.loads(path.read_text())
        assert (DEMO / side["payload"]).is_file(), side["payload"]
        assert side["scenario"] and side["why"] and side["expect"]
        assert set(side["requires"]) <= FEATURES


def test_committed_payloads_are_what_the_seeded_generator_writes():
    run = subprocess.run([sys.executable, str(DEMO / "generate.py"), "--check"], capture_output=True, text=True)
    assert run.returncode == 0, run.stderr


@pytest.mark.parametrize("sidecar", list(_cases()))
def test_payload_reaches_the_stated_conclusion(client, sidecar):
    side = json.loads(sidecar.read_text())
    r = send(client, side)
    assert r.status_code == 200, r.get_json()
    body = r.get_json()
    if "batch" in side["expect"]:
        check_batch(body, side["expect"]["batch"])
    elif "model_check" in side["expect"]:
        check_model_check(body, side["expect"]["model_check"])
    elif "stability" in side["expect"]:
        check_stability(body, side["expect"]["stability"])
    elif "driver_check" in side["expect"]:
        check_driver_check(body, side["expect"]["driver_check"])
    else:
        check_report(body, side["expect"])

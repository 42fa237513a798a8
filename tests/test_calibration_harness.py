"""The calibration simulation's own parts: its generators make the processes they name, its seeds
reproduce, and its readers take the service's answers (and the fields still to come) as documented.

Theoretical autocorrelations come from statsmodels.tsa.arima_process.ArmaProcess.acf; the GARCH(1,1)
unconditional variance omega / (1 - alpha - beta) is Bollerslev (1986), recalled from memory.
"""
from __future__ import annotations

import numpy as np
import pytest
from statsmodels.tsa.arima_process import ArmaProcess

from calibration import consult, scenarios, targets
from calibration.scenarios import SCENARIOS, generate


def _mean_acf(x: np.ndarray, lags) -> np.ndarray:
    """Sample autocorrelations of each row (biased estimator), averaged over the rows."""
    x = x - x.mean(axis=1, keepdims=True)
    denominator = (x * x).sum(axis=1)
    return np.array([np.mean((x[:, k:] * x[:, :-k]).sum(axis=1) / denominator) for k in lags])


@pytest.mark.parametrize("name,ar,ma,lags", [
    ("ar1_0.3", [1, -0.3], [1], (1, 2, 3)),
    ("ar1_0.5", [1, -0.5], [1], (1, 2, 3)),
    ("ma1_0.4", [1], [1, 0.4], (1, 2)),
    ("seasonal_ar", [1] + [0] * 11 + [-0.5], [1], (1, 12, 24)),
    ("over_differenced", [1], [1, -1], (1, 2)),
])
def test_linear_processes_have_their_theoretical_autocorrelations(name, ar, ma, lags):
    x = generate(SCENARIOS[name], 200, 2000)
    expected = ArmaProcess(np.array(ar, float), np.array(ma, float)).acf(max(lags) + 1)[list(lags)]
    # 200 series of 2,000: the mean sample r_k has a standard error near 0.0016 and a bias of order 1/n
    assert _mean_acf(x, lags) == pytest.approx(expected, abs=0.01)


def test_iid_families_are_centred_and_uncorrelated():
    for name in ("iid_normal", "iid_t3", "iid_skewed", "iid_uniform"):
        x = generate(SCENARIOS[name], 200, 1000)
        assert abs(x.mean()) < 0.02, name
        assert np.abs(_mean_acf(x, (1, 2, 7))).max() < 0.01, name
    skewed = generate(SCENARIOS["iid_skewed"], 100, 1000)
    assert np.mean(skewed**3) / np.mean(skewed**2) ** 1.5 == pytest.approx(2.0, abs=0.2)  # exponential: skewness 2


def test_garch_has_no_autocorrelation_but_clustered_variance():
    x = generate(SCENARIOS["garch"], 200, 2000)
    assert np.var(x) == pytest.approx(0.1 / (1 - 0.15 - 0.8), rel=0.1)  # omega / (1 - alpha - beta) = 2
    assert abs(_mean_acf(x, (1,))[0]) < 0.01
    assert _mean_acf(x**2, (1,))[0] > 0.1  # the squares are autocorrelated


def test_trend_spans_three_noise_standard_deviations():
    x = generate(SCENARIOS["trend"], 2000, 300)
    assert np.mean(x[:, -1] - x[:, 0]) == pytest.approx(3.0, abs=0.1)
    assert np.std(x[:, 0]) == pytest.approx(1.0, abs=0.05)


def test_random_walk_steps_are_the_innovations():
    x = generate(SCENARIOS["random_walk"], 500, 300)
    steps = np.diff(x, axis=1)
    assert np.std(steps) == pytest.approx(1.0, abs=0.01) and abs(_mean_acf(steps, (1,))[0]) < 0.01


def test_outlier_moves_exactly_one_value_by_25():
    reps, n = 300, 200
    x = generate(SCENARIOS["outlier"], reps, n)
    clean = scenarios.ar1(0.5)(scenarios.rng_for("outlier", n), reps, n)  # the same draws, before the move
    moved = np.abs(x - clean)
    assert np.all(np.count_nonzero(moved, axis=1) == 1)
    assert np.allclose(moved.max(axis=1), 25.0)


def test_gaps_leave_forty_percent_null():
    rows = generate(SCENARIOS["gaps_40"], 50, 300)
    assert [sum(v is None for v in row) for row in rows] == [120] * 50
    assert all(isinstance(v, float) for row in rows for v in row if v is not None)
    assert SCENARIOS["gaps_40"].options == {"missing": "interpolate"}


def test_seeds_reproduce_and_differ_between_cases():
    s = SCENARIOS["iid_normal"]
    assert np.array_equal(generate(s, 5, 50), generate(s, 5, 50))
    assert not np.array_equal(generate(s, 5, 50), generate(SCENARIOS["short"], 5, 50))
    assert not np.array_equal(generate(s, 5, 50)[:, :20], generate(s, 5, 20))


def test_reading_takes_todays_answers_and_the_fields_to_come():
    today = {"verdict": {"white_noise": False, "structure": ["autocorrelation"]},
             "advice": [{"action": "Add an AR(1) term.", "reason": "r1 is large."}]}
    assert consult.reading(today) == {"error": False, "white_noise": False, "kinds": ["autocorrelation"],
                                      "first_code": None, "has_code": False}
    later = {"verdict": {"white_noise": False, "structure": [{"kind": "trend"}, "autocorrelation"]},
             "advice": [{"code": "remove_trend", "action": "Remove the trend.", "reason": "It rises."}]}
    assert consult.reading(later) == {"error": False, "white_noise": False, "kinds": ["trend", "autocorrelation"],
                                      "first_code": "remove_trend", "has_code": True}
    assert consult.reading({"id": 3, "error": {"status": 422}}) == {"error": True}


def test_false_discovery_reading_is_found_wherever_it_sits():
    assert consult.find_fdr({"verdict": {"white_noise": True}, "acf": {"values": [0.1, 0.2]}}) is None
    assert consult.find_fdr({"verdict": {"fdr": {"q_value": 0.2, "flagged": False}}}) == (
        "/verdict/fdr", {"q_value": 0.2, "flagged": False})
    assert consult.find_fdr({"tests": [{"name": "ljung_box"}, {"adjusted_p_value": 0.01}]}) == (
        "/tests/1/adjusted_p_value", 0.01)
    flag = consult.flagged_after_adjustment
    assert flag(True, 0.05) is True and flag(0.04, 0.05) is True and flag(0.06, 0.05) is False
    assert flag({"q_value": 0.2, "flagged": True}, 0.05) is True  # the decision field wins over the number
    assert flag({"q_value": 0.01}, 0.05) is True and flag({"note": "n/a"}, 0.05) is None and flag(None, 0.05) is None


def _case(scenario: str, n: int, rates: dict, family: str = "mechanism", **extra) -> dict:
    s = SCENARIOS[scenario]
    return {"scenario": scenario, "family": family, "n": n, "timestamps": False, "confidence": 0.95,
            "answered": 400, "expected": {"white_noise": s.white_noise, "structure": s.structure, "advice": s.advice},
            "rates": rates, **extra}


def test_targets_judge_rates_and_report_what_is_missing_as_na():
    low, high = {"rate": 0.05, "se": 0.011, "of": 400}, {"rate": 0.08, "se": 0.014, "of": 400}
    results = {"cases": [
        _case("iid_normal", 100, {"not_white_noise": low, "any_structure": high}, family="iid"),
        _case("trend", 300, {"expected_structure": None, "expected_advice": {"rate": 0.95, "se": 0.01, "of": 400},
                             "kinds": {}, "not_white_noise": high}),
        _case("garch", 300, {"kinds": {}, "not_white_noise": low, "expected_structure": None,
                             "expected_advice": None})],
        "batch": None}
    rows = {r["target"]: r for r in targets.evaluate(results)}
    assert rows["iid_false_alarm"]["ok"] is True and rows["iid_any_structure"]["ok"] is False
    assert rows["iid_any_structure"]["bound"] == pytest.approx(0.06)
    assert rows["mechanism_structure"]["ok"] is None and targets.within_tolerance(rows["mechanism_structure"]) is None
    assert rows["mechanism_advice"]["ok"] is True
    assert rows["garch_autocorrelation"]["measured"] == 0.0 and rows["garch_autocorrelation"]["ok"] is True
    # 8% against 6% over 400 series: 2.5 standard errors at the bound are 2.5 sqrt(0.06 0.94 / 400) = 0.0297
    assert targets.tolerance(rows["iid_any_structure"]) == pytest.approx(0.0297, abs=1e-4)
    assert targets.within_tolerance(rows["iid_any_structure"]) is True

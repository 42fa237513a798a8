"""The consultation's targets, judged on a smaller seeded run of the calibration simulation (calibration/,
the code behind `make calibrate` and CALIBRATION.md; simulated series, not references).

Each check allows 2.5 Monte Carlo standard errors at its bound (calibration.targets.tolerance, computed
from the reps of the case), so a rate that truly sits at its bound fails one check about 0.6% of the
time; with dozens of checks, a failure close to a bound is worth re-reading in CALIBRATION.md (larger
runs) before it is believed, and a passing check is no proof of calibration either.
A check that cannot read what its target needs (a structure kind, the advice `code`, the batch's
false-discovery reading) fails and says so.
The single Ljung-Box test the power is compared with is statsmodels.stats.diagnostic.acorr_ljungbox (lag 10).
"""
from __future__ import annotations

import json

import pytest

from calibration import run, targets

#: The subset: fewer series per case and fewer lengths than `make calibrate`, the same seeds and code.
PLAN = {"iid_reps": 600, "power_reps": 600, "mechanism_reps": 300, "iid_ns": (20, 100, 300, 1000),
        "mechanism_ns": (100, 300), "noise_batches": 40, "ar_batches": 10, "extra_confidence": 0.90}
K = 2.5  # standard errors allowed at each bound


@pytest.fixture(scope="module")
def rows():
    return run.measure(PLAN, log=lambda *_: None)["targets"]


def _judge(rows: list[dict], target: str) -> list[str]:
    """The cases of a target that miss it by more than the Monte Carlo allowance, or that it cannot read."""
    mine = [r for r in rows if r["target"] == target]
    assert mine, f"no case of {target} was run"
    misses = []
    for r in mine:
        verdict = targets.within_tolerance(r, K)
        if verdict is None:
            misses.append(f"{r['case']}: n/a (the service does not report what this target reads)")
        elif not verdict:
            sign = "<=" if r["direction"] == "max" else ">="
            misses.append(f"{r['case']}: {r['measured']:.4f} (of {r['of']}), target {sign} {r['bound']:.4f}"
                          f" with {targets.tolerance(r, K):.4f} allowed")
    return misses


@pytest.mark.slow
@pytest.mark.parametrize("target", ["iid_false_alarm", "iid_any_structure"])
def test_iid_series_are_rarely_called_structured(rows, target):
    """normal, t3, centred exponential, uniform; n 20, 100, 1,000; with and without daily timestamps;
    confidence 0.95 (and 0.90 for the normal): at most (1 - c) + 1 point."""
    misses = _judge(rows, target)
    assert not misses, "\n".join(misses)


@pytest.mark.slow
def test_verdict_power_is_near_a_single_ljung_box_test(rows):
    """AR(1) 0.3 and MA(1) 0.4 at n 100 and 300: detection at least Ljung-Box(10)'s minus 5 points
    (paired on the same series; reference: statsmodels acorr_ljungbox)."""
    misses = _judge(rows, "power")
    assert not misses, "\n".join(misses)


@pytest.mark.slow
@pytest.mark.parametrize("target", ["mechanism_structure", "mechanism_advice"])
@pytest.mark.parametrize("scenario", targets.NAMED_MECHANISMS)
def test_mechanisms_are_named_and_advised_at_n_300(rows, scenario, target):
    misses = _judge([r for r in rows if r.get("scenario") == scenario], target)
    assert not misses, "\n".join(misses)


@pytest.mark.slow
def test_garch_is_not_called_autocorrelation(rows):
    misses = _judge(rows, "garch_autocorrelation")
    assert not misses, "\n".join(misses)


@pytest.mark.slow
@pytest.mark.parametrize("target", ["horizon_false_alarm", "horizon_found"])
def test_forecast_errors_are_judged_beyond_their_horizon(rows, target):
    """Optimal 3- and 6-step forecast errors of an AR(1) (phi 0.8) sent with their horizon: white_noise false at
    most (1 - c) + 1 point (n 100, 300); a wrong model's 3-step errors at n 300: flagged in at least 80%."""
    misses = _judge(rows, target)
    assert not misses, "\n".join(misses)


@pytest.mark.slow
@pytest.mark.parametrize("target", ["batch_noise", "batch_ar_found"])
def test_batch_false_discovery(rows, target):
    misses = _judge(rows, target)
    assert not misses, "\n".join(misses)


@pytest.mark.slow
def test_quick_run_writes_the_report_and_its_numbers(tmp_path):
    out = tmp_path / "CALIBRATION.md"
    out.write_text("# old\n<!-- notes: hand-written, kept when the report is regenerated -->\nkept analysis\n"
                   "<!-- /notes -->\n")
    results = run.main(["--quick", "--out", str(out)])
    text = out.read_text()
    for heading in ("## How it was run", "## Targets", "## i.i.d. series", "## Power beside", "## Processes with",
                    "## Batches and false discovery", "## Analysis"):
        assert heading in text, heading
    assert "kept analysis" in text and "Quick run" in text
    assert f"seed: {results['seed']}" in text and "python -m calibration.run --quick" in text
    assert results["commit"].split()[0] in text
    saved = json.loads(out.with_suffix(".json").read_text())
    assert saved["quick"] is True and len(saved["cases"]) == len(results["cases"])
    # every planned case ran, every series answered, and each target has its rows
    planned = sum(len(v) for *_, v in run.plan_cases(run.QUICK))
    assert len(results["cases"]) == planned
    assert all(c["errors"] == 0 and c["answered"] == c["reps"] for c in results["cases"])
    assert {r["target"] for r in results["targets"]} == {t for t, _ in targets.TARGETS}

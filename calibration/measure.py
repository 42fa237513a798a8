"""Rates per (scenario, n, variant) with Monte Carlo standard errors, the Ljung-Box reference, and the
batch false-discovery part.

A rate p over m series has Monte Carlo standard error sqrt(p (1 - p) / m) (binomial; common practice,
no source). Rates count the series the service answered; errors and null verdicts are counted apart.
"""
from __future__ import annotations

import math
import time

import numpy as np
from statsmodels.stats.diagnostic import acorr_ljungbox

from . import consult
from .scenarios import POWER_NS, POWER_SCENARIOS, Scenario, ar1, generate, rng_for

REFERENCE_LAG = 10
BATCH_SIZE = 300
NOISE_BATCH_N = 100
AR_BATCH_N = 200
AR_SHARE = 0.05
AR_PHI = 0.4


def rate(count: int, of: int) -> dict | None:
    if not of:
        return None
    p = count / of
    return {"rate": p, "se": math.sqrt(p * (1 - p) / of), "count": int(count), "of": int(of)}


def paired_difference(a: np.ndarray, b: np.ndarray) -> dict:
    """Mean of a - b over paired 0/1 outcomes (the same series), with its standard error."""
    d = a.astype(float) - b.astype(float)
    return {"difference": float(d.mean()), "se": float(d.std() / math.sqrt(d.size)), "of": int(d.size)}


def ljung_box_rejects(x: np.ndarray, alpha: float) -> np.ndarray:
    """Reference: statsmodels.stats.diagnostic.acorr_ljungbox at lag 10, rejecting at p < alpha."""
    return np.array([acorr_ljungbox(row, lags=[REFERENCE_LAG])["lb_pvalue"].iloc[0] < alpha for row in x])


def summarise(scenario: Scenario, readings: list[dict], service: consult.Service) -> dict:
    answered = [r for r in readings if not r["error"]]
    m = len(answered)
    flagged = np.array([r["white_noise"] is False for r in answered])
    kinds: dict[str, int] = {}
    for r in answered:
        for k in set(r["kinds"]):
            kinds[k] = kinds.get(k, 0) + 1
    rates = {"not_white_noise": rate(int(flagged.sum()), m),
             "any_structure": rate(sum(bool(r["kinds"]) for r in answered), m),
             "kinds": {k: rate(c, m) for k, c in sorted(kinds.items())}}
    notes = []
    want = scenario.structure
    if want is None:
        rates["expected_structure"] = rate(sum(not r["kinds"] for r in answered), m)
    elif want in service.structure_kinds or want in kinds:
        rates["expected_structure"] = rate(kinds.get(want, 0), m)
    else:
        rates["expected_structure"] = None
        notes.append(f"structure kind {want!r} is not in the service's vocabulary")
    if service.advice_has_code or any(r["has_code"] for r in answered):
        rates["expected_advice"] = rate(sum(r["first_code"] == scenario.advice for r in answered), m)
    else:
        rates["expected_advice"] = None
        notes.append("advice items carry no code")
    return {"reps": len(readings), "answered": m, "errors": len(readings) - m,
            "undetermined": sum(r["white_noise"] is None for r in answered), "rates": rates, "notes": notes,
            "_flagged": flagged}


def run_scenario(service: consult.Service, scenario: Scenario, n: int, reps: int,
                 variants: list[tuple[bool, float]]) -> list[dict]:
    """Every (timestamps, confidence) variant of one scenario at length n, on the same seeded series."""
    x = generate(scenario, reps, n)
    cases = []
    for stamps, confidence in variants:
        started = time.perf_counter()
        shared = {**scenario.options, "confidence": confidence}
        results = service.diagnose(x, shared, consult.daily_stamps(n) if stamps else None)
        case = {"scenario": scenario.name, "family": scenario.family, "description": scenario.description,
                "n": n, "timestamps": stamps, "confidence": confidence,
                "options": scenario.options,
                "expected": {"white_noise": scenario.white_noise, "structure": scenario.structure,
                             "advice": scenario.advice},
                **summarise(scenario, [consult.reading(r) for r in results], service)}
        flagged = case.pop("_flagged")
        if scenario.name in POWER_SCENARIOS and n in POWER_NS and case["errors"] == 0:
            lb = ljung_box_rejects(np.asarray(x), 1 - confidence)
            case["reference"] = {"name": f"statsmodels acorr_ljungbox, lag {REFERENCE_LAG}",
                                 "rejects": rate(int(lb.sum()), lb.size),
                                 "verdict_minus_reference": paired_difference(flagged, lb)}
        case["seconds"] = time.perf_counter() - started
        cases.append(case)
    return cases


def _adjusted(results: list[dict], alpha: float) -> tuple[list[bool | None], str | None]:
    """Each series' flag after the batch's adjustment (None where no reading), and the first path found."""
    flags, path = [], None
    for r in results:
        found = consult.find_fdr(r)
        if found is None:
            flags.append(None)
            continue
        path = path or found[0]
        flags.append(consult.flagged_after_adjustment(found[1], alpha))
    return flags, path


def run_batches(service: consult.Service, noise_batches: int, ar_batches: int, confidence: float = 0.95) -> dict:
    """Pure-noise batches (300 series, n = 100) and batches with 5% AR(1) phi = 0.4 series (n = 200)."""
    alpha = 1 - confidence
    started = time.perf_counter()
    out: dict = {"confidence": confidence, "batch_size": BATCH_SIZE, "series_path": None, "batch_path": None,
                 "batch_reading": None}

    def post(x) -> list[dict]:
        body = service.post({"series": [{"id": i, "values": row} for i, row in enumerate(x)],
                             "detail": "full", "confidence": confidence})
        across = body.get("summary", {}).get("false_discovery")
        if across:  # the service's reading: q-values in request order in summary.false_discovery
            for r, q in zip(body["results"], across["q_values"]):
                if q is not None:
                    r["fdr_q_value"] = q
            if out["batch_path"] is None:
                out["batch_path"] = "/summary/false_discovery"
                out["batch_reading"] = {k: v for k, v in across.items() if k not in ("q_values", "standing_out_ids")}
        if out["batch_path"] is None:
            found = consult.find_fdr({k: v for k, v in body.items() if k != "results"})
            if found:
                out["batch_path"], out["batch_reading"] = found
        return body["results"]

    rng = rng_for("batch_noise", NOISE_BATCH_N)
    any_raw = any_adjusted = readable = 0
    for _ in range(noise_batches):
        results = post(rng.standard_normal((BATCH_SIZE, NOISE_BATCH_N)))
        any_raw += any(consult.reading(r).get("white_noise") is False for r in results)
        flags, path = _adjusted(results, alpha)
        out["series_path"] = out["series_path"] or path
        if any(f is not None for f in flags):
            readable += 1
            any_adjusted += any(f is True for f in flags)
    out["noise"] = {"n": NOISE_BATCH_N, "batches": noise_batches,
                    "any_flagged_unadjusted": rate(any_raw, noise_batches),
                    "any_flagged_adjusted": rate(any_adjusted, readable)}
    rng = rng_for("batch_ar", AR_BATCH_N)
    k = round(AR_SHARE * BATCH_SIZE)
    found_raw = found_adj = ar_total = readable = 0
    proportions = []
    for _ in range(ar_batches):
        x = rng.standard_normal((BATCH_SIZE, AR_BATCH_N))
        where = rng.choice(BATCH_SIZE, k, replace=False)
        x[where] = ar1(AR_PHI)(rng, k, AR_BATCH_N)
        results = post(x)
        is_ar = np.zeros(BATCH_SIZE, bool)
        is_ar[where] = True
        ar_total += k
        found_raw += sum(consult.reading(results[i]).get("white_noise") is False for i in where)
        flags, path = _adjusted(results, alpha)
        out["series_path"] = out["series_path"] or path
        if any(f is not None for f in flags):
            readable += 1
            hit = np.array([f is True for f in flags])
            found_adj += int(hit[is_ar].sum())
            proportions.append(float(hit[~is_ar].sum() / hit.sum()) if hit.any() else 0.0)
    out["ar"] = {"n": AR_BATCH_N, "phi": AR_PHI, "per_batch": k, "batches": ar_batches,
                 "found_unadjusted": rate(found_raw, ar_total),
                 "found_adjusted": rate(found_adj, readable * k),
                 "false_discovery_proportion": ({"mean": float(np.mean(proportions)),
                                                 "se": float(np.std(proportions) / math.sqrt(len(proportions))),
                                                 "of": len(proportions)} if proportions else None)}
    out["available"] = out["series_path"] is not None
    out["seconds"] = time.perf_counter() - started
    return out

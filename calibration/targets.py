"""The consultation's targets, judged on the measured rates: one row per (target, case).

A row is met when the point estimate is on the right side of the bound; "n/a" when the service does
not report what the target reads (a structure kind, an advice code, a false-discovery reading).
:func:`tolerance` gives the Monte Carlo allowance the tests add (k standard errors at the bound).
"""
from __future__ import annotations

import math

MECHANISM_N = 300
MECHANISM_TARGET = 0.90
NAMED_MECHANISMS = ("trend", "random_walk", "over_differenced", "outlier", "seasonal_ar")
GARCH_AUTOCORRELATION_MAX = 0.10
POWER_SHORTFALL = 0.05
AR_FOUND_MIN = 0.80
HORIZON_FOUND_MIN = 0.80

#: (target id, wording) in the order the report lists them.
TARGETS = (
    ("iid_false_alarm", "i.i.d. series (normal, t3, skewed, uniform; n 20 to 5,000; with and without daily "
                        "timestamps): `white_noise` false in at most (1 - c) + 1 point at confidence c"),
    ("iid_any_structure", "the same series: any structure named in `verdict.structure` at most (1 - c) + 1 point"),
    ("power", "AR(1) phi 0.3 and MA(1) theta 0.4 at n 100 and 300: verdict detection at least the single "
              "Ljung-Box test at lag 10 (statsmodels `acorr_ljungbox`, same series, same level) minus 5 points"),
    ("mechanism_structure", "at n 300, trend, random walk, over-differenced, one outlier, seasonal AR: the expected "
                            "structure kind named in at least 90%"),
    ("mechanism_advice", "the same: the expected code on the first advice item in at least 90%"),
    ("garch_autocorrelation", "GARCH(1,1) without autocorrelation at n 300: \"autocorrelation\" named at most 10%"),
    ("horizon_false_alarm", "errors of optimal 3- and 6-step forecasts of an AR(1) with phi 0.8 (MA(2), MA(5)), sent "
                            "with horizon 3 and 6: `white_noise` false in at most (1 - c) + 1 point"),
    ("horizon_found", "errors of 3-step forecasts of an AR(1) with phi 0.8 made with phi 0.4 at n 300, horizon 3: "
                      "`white_noise` false in at least 80%"),
    ("batch_noise", "batches of 300 pure-noise series (n 100): share with any series flagged after the batch's "
                    "false-discovery adjustment at most 1 - c"),
    ("batch_ar_found", "batches of 300 with 5% AR(1) phi 0.4 series (n 200): at least 80% of those series flagged "
                       "after the adjustment"),
)


def identity(case: dict) -> dict:
    return {k: case.get(k) for k in ("scenario", "n", "timestamps", "confidence")}


def label(case: dict) -> str:
    stamps = ", daily timestamps" if case.get("timestamps") else ""
    return f"{case['scenario']} n={case['n']}{stamps}, c={case['confidence']:g}"


def _row(target: str, case_label: str, direction: str, bound: float, value: dict | None, **extra) -> dict:
    measured = None if value is None else value.get("rate", value.get("difference"))
    ok = None
    if measured is not None:
        ok = measured <= bound if direction == "max" else measured >= bound
    return {"target": target, "case": case_label, "direction": direction, "bound": bound, "measured": measured,
            "se": None if value is None else value.get("se"), "of": None if value is None else value.get("of"),
            "ok": ok, **extra}


def evaluate(results: dict) -> list[dict]:
    rows = []
    for case in results["cases"]:
        r, c = case["rates"], case["confidence"]
        if case["family"] == "iid":
            bound = round((1 - c) + 0.01, 10)
            rows.append(_row("iid_false_alarm", label(case), "max", bound, r["not_white_noise"], **identity(case)))
            rows.append(_row("iid_any_structure", label(case), "max", bound, r["any_structure"], **identity(case)))
        if "reference" in case:
            rows.append(_row("power", label(case), "min", -POWER_SHORTFALL,
                             case["reference"]["verdict_minus_reference"], paired=True, **identity(case)))
        if case["n"] == MECHANISM_N and case["scenario"] in NAMED_MECHANISMS:
            rows.append(_row("mechanism_structure", f"{label(case)}: {case['expected']['structure']}", "min",
                             MECHANISM_TARGET, r["expected_structure"], **identity(case)))
            rows.append(_row("mechanism_advice", f"{label(case)}: {case['expected']['advice']}", "min",
                             MECHANISM_TARGET, r["expected_advice"], **identity(case)))
        if case["family"] == "horizon" and case["expected"]["white_noise"]:
            rows.append(_row("horizon_false_alarm", label(case), "max", round((1 - c) + 0.01, 10),
                             r["not_white_noise"], **identity(case)))
        if case["family"] == "horizon" and not case["expected"]["white_noise"] and case["n"] == MECHANISM_N:
            rows.append(_row("horizon_found", label(case), "min", HORIZON_FOUND_MIN, r["not_white_noise"],
                             **identity(case)))
        if case["scenario"] == "garch" and case["n"] == MECHANISM_N:
            named = r["kinds"].get("autocorrelation") or {"rate": 0.0, "se": 0.0, "of": case["answered"]}
            rows.append(_row("garch_autocorrelation", label(case), "max", GARCH_AUTOCORRELATION_MAX, named,
                             **identity(case)))
    batch = results.get("batch")
    if batch:
        c = batch["confidence"]
        rows.append(_row("batch_noise", f"{batch['noise']['batches']} batches, c={c:g}", "max", round(1 - c, 10),
                         batch["noise"]["any_flagged_adjusted"]))
        rows.append(_row("batch_ar_found", f"{batch['ar']['batches']} batches, c={c:g}", "min", AR_FOUND_MIN,
                         batch["ar"]["found_adjusted"]))
    return rows


def tolerance(row: dict, k: float = 2.5) -> float:
    """k Monte Carlo standard errors: of the paired difference for the power rows (measured), of a
    binomial rate at the bound for the others (the spread the estimate would have if the bound were
    the truth)."""
    if row.get("paired"):
        return k * row["se"]
    b, m = row["bound"], row["of"]
    return k * math.sqrt(b * (1 - b) / m)


def within_tolerance(row: dict, k: float = 2.5) -> bool | None:
    if row["measured"] is None:
        return None
    slack = tolerance(row, k)
    return row["measured"] <= row["bound"] + slack if row["direction"] == "max" else \
        row["measured"] >= row["bound"] - slack


def summary(rows: list[dict]) -> list[dict]:
    """Per target: cases met, not met and n/a, and the worst case (furthest on the wrong side)."""
    out = []
    for target, wording in TARGETS:
        mine = [r for r in rows if r["target"] == target]
        judged = [r for r in mine if r["ok"] is not None]
        worst = None
        if judged:
            sign = 1 if mine[0]["direction"] == "max" else -1
            worst = max(judged, key=lambda r: sign * (r["measured"] - r["bound"]))
        out.append({"target": target, "wording": wording, "cases": len(mine),
                    "met": sum(r["ok"] is True for r in mine), "not_met": sum(r["ok"] is False for r in mine),
                    "na": sum(r["ok"] is None for r in mine), "worst": worst})
    return out

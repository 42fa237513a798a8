"""Verdict, plain-language sentences, advice and cautions, read off a numeric report.

Decision rule (documented in /v1/methods, the README and the OpenAPI file)
--------------------------------------------------------------------------
Let alpha = 1 - confidence. Up to three families of evidence are used, and each
gets alpha / F, where F is the number of families available (Bonferroni), so
the chance that an i.i.d. series is called "not white noise" stays at or below
alpha whatever the number of lags:
1. portmanteau: the Ljung-Box p-values at the reported lags that have degrees
   of freedom (Box-Pierce if Ljung-Box was not requested), each compared with
   alpha / (F L) for L lags;
2. spikes: the largest |r_k - centre_k| / se_k over lags 1..K, compared with the
   Sidak-corrected normal quantile for K lags at level alpha / F;
3. seasonal (when a period is known and reached by max_lag): the largest
   standardised autocorrelation at the seasonal lags m, 2m, 3m, Sidak-corrected
   for those lags at level alpha / F.
The series is judged not white noise when any family rejects; white noise
(meaning: no evidence against it) when none does and the portmanteau family was
available; otherwise the verdict is null. Volatility clustering (McLeod-Li at
level alpha, counted only when no autocorrelation was found, because squares of
an autocorrelated series are autocorrelated too) and the runs, turning-point and
cumulative periodogram checks are reported in `verdict.structure` and the
sentences but do not flip `white_noise`, which is about autocorrelation.
"""
from __future__ import annotations

import math

from lagsight import options
from lagsight.consult.words import fmt_p, tests_by_name, tests_named


def max_standardised(block: dict, lags: list[int]) -> tuple[float, int]:
    values, centre, se = block["values"], block["centre"], block["standard_error"]
    best, where = -1.0, lags[0]
    if lags is block["lags"]:  # every lag, in order: walk the lists side by side
        for lag, v, c, s in zip(lags, values, centre, se):
            z = abs(v - c) / s
            if z > best:
                best, where = z, lag
        return best, where
    for lag in lags:
        i = lag - 1
        z = abs(values[i] - centre[i]) / se[i]
        if z > best:
            best, where = z, lag
    return best, where


def sidak_p(z: float, count: int) -> float:
    """Probability that the largest of `count` independent |N(0,1)| exceeds z."""
    tail = math.erfc(z / math.sqrt(2.0))  # P(|Z| > z)
    return -math.expm1(count * math.log1p(-tail)) if tail < 1.0 else 1.0


#: Verdict summaries; decision_block.py builds the same verdict from arrays and uses these too.
SUMMARY_UNDETERMINED = ("No judgement: no portmanteau lag has degrees of freedom left after model_df, and no spike "
                        "stands out; raise max_lag or check model_df.")


SUMMARY_CLUSTERING = ("No significant autocorrelation, but large swings cluster in time: uncorrelated, yet not "
                      "independent noise.")


_EVIDENCE_WHAT = {"ljung_box": "the Ljung-Box test up to lag {lag}", "box_pierce": "the Box-Pierce test up to lag {lag}",
                  "largest_spike": "the spike at lag {lag}", "seasonal_spike": "the seasonal lag {lag}"}


def summary_not_white(source: str, lag: int, p: float) -> str:
    return f"Not white noise: autocorrelation remains ({_EVIDENCE_WHAT[source].format(lag=lag)}, {fmt_p(p)})."


def summary_white(test_name: str, p: float) -> str:
    label = "Ljung-Box" if test_name == "ljung_box" else "Box-Pierce"
    return (f"Consistent with white noise: no significant autocorrelation at the lags checked (smallest "
            f"{label} {fmt_p(p)}).")


def short_series_warning(n: int) -> dict:
    return {"code": "short_series", "message": (
        f"n = {n} is below {options.SMALL_SAMPLE_N}: chi-square p-values are approximate (at n = 30 the "
        "5% Ljung-Box test rejects about 7% of pure-noise series); consider p_values \"monte_carlo\".")}


def verdict(report: dict, tests: dict[str, list[dict]] | None = None) -> dict:
    """The verdict object (see the module docstring for the rule)."""
    tests = tests_by_name(report) if tests is None else tests
    alpha = 1.0 - report["confidence"]
    portmanteau = [t for t in tests_named(tests, "ljung_box") if t["p_value"] is not None] or \
                  [t for t in tests_named(tests, "box_pierce") if t["p_value"] is not None]
    seasonal_lags = [e["lag"] for e in report["seasonal"]["lags"]]
    families = 1 + bool(portmanteau) + bool(seasonal_lags)
    level = alpha / families
    evidence = []
    if portmanteau:
        threshold = level / len(portmanteau)
        for t in portmanteau:
            evidence.append({"source": t["name"], "lag": t["lag"], "p_value": t["p_value"], "threshold": threshold,
                             "against_white_noise": t["p_value"] < threshold})
    K = report["max_lag"]
    z, lag = max_standardised(report["acf"], report["acf"]["lags"])
    p_spike = sidak_p(z, K)
    evidence.append({"source": "largest_spike", "lag": lag, "p_value": p_spike, "threshold": level,
                     "against_white_noise": p_spike < level})
    if seasonal_lags:
        zs, slag = max_standardised(report["acf"], seasonal_lags)
        p_seasonal = sidak_p(zs, len(seasonal_lags))
        evidence.append({"source": "seasonal_spike", "lag": slag, "p_value": p_seasonal, "threshold": level,
                         "against_white_noise": p_seasonal < level})
    against = [e for e in evidence if e["against_white_noise"]]
    structure = _structure(report, against, alpha, tests)
    if against:
        worst = min(against, key=lambda e: e["p_value"] / e["threshold"])
        strength = "strong" if worst["p_value"] < worst["threshold"] / 10 else "moderate"
        summary = summary_not_white(worst["source"], worst["lag"], worst["p_value"])
        return {"white_noise": False, "summary": summary, "evidence": evidence, "confidence": strength,
                "structure": structure}
    if not portmanteau:
        return {"white_noise": None, "summary": SUMMARY_UNDETERMINED, "evidence": evidence,
                "confidence": "none", "structure": structure}
    smallest = min(e["p_value"] / e["threshold"] * alpha for e in evidence)  # on the scale of alpha
    strength = "moderate" if smallest > 4 * alpha and report["n"] >= options.SMALL_SAMPLE_N else "weak"
    best = min(portmanteau, key=lambda t: t["p_value"])
    summary = (SUMMARY_CLUSTERING if "volatility_clustering" in structure
               else summary_white(best["name"], best["p_value"]))
    return {"white_noise": True, "summary": summary, "evidence": evidence, "confidence": strength,
            "structure": structure}


def _structure(report: dict, against: list[dict], alpha: float, tests: dict[str, list[dict]]) -> list[str]:
    kinds = []
    sources = {e["source"] for e in against}
    if sources & {"ljung_box", "box_pierce", "largest_spike"}:
        kinds.append("autocorrelation")
    if "seasonal_spike" in sources:
        kinds.append("seasonal")
    if any(t["reject"] for t in tests_named(tests, "mcleod_li")) and "autocorrelation" not in kinds:
        # Squares of an autocorrelated series are autocorrelated too; McLeod-Li speaks of
        # variance only once the linear dependence is gone.
        kinds.append("volatility_clustering")
    if any(t["reject"] for t in tests_named(tests, "runs") + tests_named(tests, "turning_points")):
        kinds.append("non_random_order")
    if any(t["reject"] for t in tests_named(tests, "cumulative_periodogram")):
        kinds.append("uneven_spectrum")
    return kinds


def leftover_seasonality(report: dict, tests: dict[str, list[dict]]) -> bool | None:
    s = report["seasonal"]
    if s["period"] is None or not s["lags"]:
        return None
    alpha = 1.0 - report["confidence"]
    seasonal_test = [t for t in tests_named(tests, "seasonal_ljung_box") if t["p_value"] is not None]
    return bool("seasonal" in report["verdict"]["structure"] or any(t["p_value"] < alpha for t in seasonal_test)
                and any(e["outside"] for e in s["lags"]))

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
from functools import lru_cache

from scipy.special import bdtrc

from . import options

MEANINGS = {
    "ljung_box": "Are the first {lag} autocorrelations jointly larger than white noise would give?",
    "box_pierce": "The original, less accurate form of the Ljung-Box test of the first {lag} autocorrelations.",
    "seasonal_ljung_box": "Are the autocorrelations at the seasonal lags jointly larger than white noise would give?",
    "mcleod_li": "Do large swings cluster in time (autocorrelation of the squared values up to lag {lag})?",
    "runs": "Do values above and below the median alternate as often as chance would have them?",
    "turning_points": "Are there as many local peaks and troughs as a random order would give?",
    "cumulative_periodogram": "Is the spectrum flat, as white noise's is, or does some frequency dominate?",
    "jarque_bera": "Are skewness and kurtosis those of a normal distribution? (Matters for prediction intervals, "
                   "not for whiteness.)",
}


@lru_cache(maxsize=4096)
def _meaning(name: str, lag: int | None) -> str:
    """The one-line meaning of a test at a lag (a handful of distinct strings, formatted once each)."""
    return MEANINGS[name].format(lag=lag)


def fmt(x: float, digits: int = 3) -> str:
    """A number for a sentence: 3 significant digits, no exponent for everyday sizes."""
    if x == 0:
        return "0"
    if abs(x) >= 1e5 or abs(x) < 1e-3:
        return f"{x:.{digits - 1}e}"
    return f"{x:.{digits}g}"


def fmt_p(p: float) -> str:
    return "p < 0.001" if p < 0.001 else f"p = {p:.3f}"


def _pct(confidence: float) -> str:
    return f"{confidence * 100:g}%"


def _lag_list(lags: list[int], most: int = 8) -> str:
    return ", ".join(str(v) for v in lags[:most]) + (" ..." if len(lags) > most else "")


def tests_by_name(report: dict) -> dict[str, list[dict]]:
    """The report's test entries grouped by test name, in report order (one pass over the list)."""
    grouped: dict[str, list[dict]] = {}
    for t in report["tests"]:
        grouped.setdefault(t["name"], []).append(t)
    return grouped


def _tests(tests: dict[str, list[dict]], name: str) -> list[dict]:
    return tests.get(name) or []


def _max_standardised(block: dict, lags: list[int]) -> tuple[float, int]:
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


def _sidak_p(z: float, count: int) -> float:
    """Probability that the largest of `count` independent |N(0,1)| exceeds z."""
    tail = math.erfc(z / math.sqrt(2.0))  # P(|Z| > z)
    return -math.expm1(count * math.log1p(-tail)) if tail < 1.0 else 1.0


#: Verdict summaries; brief.py builds the same verdict from arrays and uses these too.
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
    portmanteau = [t for t in _tests(tests, "ljung_box") if t["p_value"] is not None] or \
                  [t for t in _tests(tests, "box_pierce") if t["p_value"] is not None]
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
    z, lag = _max_standardised(report["acf"], report["acf"]["lags"])
    p_spike = _sidak_p(z, K)
    evidence.append({"source": "largest_spike", "lag": lag, "p_value": p_spike, "threshold": level,
                     "against_white_noise": p_spike < level})
    if seasonal_lags:
        zs, slag = _max_standardised(report["acf"], seasonal_lags)
        p_seasonal = _sidak_p(zs, len(seasonal_lags))
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
    if any(t["reject"] for t in _tests(tests, "mcleod_li")) and "autocorrelation" not in kinds:
        # Squares of an autocorrelated series are autocorrelated too; McLeod-Li speaks of
        # variance only once the linear dependence is gone.
        kinds.append("volatility_clustering")
    if any(t["reject"] for t in _tests(tests, "runs") + _tests(tests, "turning_points")):
        kinds.append("non_random_order")
    if any(t["reject"] for t in _tests(tests, "cumulative_periodogram")):
        kinds.append("uneven_spectrum")
    return kinds


def sentences(report: dict, tests: dict[str, list[dict]] | None = None) -> list[str]:
    """Plain sentences with the numbers in them; none that the numbers do not support."""
    tests = tests_by_name(report) if tests is None else tests
    out = []
    ex, K = report["exceedances"], report["max_lag"]
    band = report["band"]
    width = f" of ±{fmt(band['half_width'])}" if band["half_width"] is not None else ""
    label = {"white_noise": "", "small_sample": " small-sample", "bartlett": " Bartlett",
             "simultaneous": " simultaneous"}[band["kind"]]
    conf = _pct(report["confidence"])
    line = (f"{ex['count']} of {K} autocorrelations (lags 1 to {K}) fall outside the {conf}{label} band{width}"
            + (f" (lags {_lag_list(report['acf']['outside'])})" if ex["count"] else "")
            + f"; about {fmt(ex['expected'], 2)} would be expected by chance if the series were white noise")
    if ex["count"]:
        line += f", and {ex['count']} or more happen by chance with probability {fmt(ex['chance_probability'], 2)}."
    else:
        line += "."
    out.append(line)
    if ex["far"]:
        out.append(f"Far outside the band (beyond 3 standard errors): lag{'s' if len(ex['far']) > 1 else ''} "
                   f"{_lag_list(ex['far'])}; chance alone rarely produces such spikes.")
    if ex["marginal"]:
        out.append(f"Just outside the band: lag{'s' if len(ex['marginal']) > 1 else ''} {_lag_list(ex['marginal'])}; "
                   "single marginal spikes like these are often chance.")
    alpha = 1.0 - report["confidence"]
    out.extend(_portmanteau_sentences(report, alpha, tests))
    out.extend(_seasonal_sentences(report, tests))
    for t in _tests(tests, "mcleod_li"):
        if t["reject"] and "volatility_clustering" in report["verdict"]["structure"]:
            out.append(f"Large and small values come in clusters: the McLeod-Li test on the squared values rejects "
                       f"({fmt_p(t['p_value'])}), a sign of changing variance (volatility clustering).")
        elif t["reject"]:
            out.append(f"The McLeod-Li test on the squared values also rejects ({fmt_p(t['p_value'])}), but squares of "
                       "an autocorrelated series are autocorrelated too: check it again on the residuals once the "
                       "autocorrelation is modelled.")
    out.extend(_randomness_sentences(report, tests))
    ur = report["unit_root"]
    if ur is not None:
        if ur["p_value"] > alpha:
            out.append(f"The autocorrelation decays slowly and the augmented Dickey-Fuller test cannot rule out a unit "
                       f"root ({fmt_p(ur['p_value'])}): the level of the series wanders.")
        else:
            out.append(f"The autocorrelation decays slowly, but the augmented Dickey-Fuller test rejects a unit root "
                       f"({fmt_p(ur['p_value'])}): strong but stationary persistence.")
    return out


def _and(items: list[str]) -> str:
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]


def _portmanteau_sentences(report: dict, alpha: float, tests: dict[str, list[dict]]) -> list[str]:
    out = []
    done = [t for t in _tests(tests, "ljung_box") if t["p_value"] is not None]
    for t in _tests(tests, "ljung_box"):
        if t["p_value"] is None:
            out.append(f"The Ljung-Box test up to lag {t['lag']} could not be computed: {t['note']}")
    if not done:
        return out
    mc = " (Monte Carlo p-values)" if done[0]["method"] == "monte_carlo" else ""
    parts = [f"up to lag {t['lag']}: Q = {fmt(t['statistic'])} on {t['df']} degrees of freedom, {fmt_p(t['p_value'])}"
             for t in done]
    rejecting = [str(t["lag"]) for t in done if t["reject"]]
    verdict = (f"it rejects white noise at the {fmt(alpha * 100, 2)}% level up to lag{'s' if len(rejecting) > 1 else ''} "
               f"{_and(rejecting)}" if rejecting
               else f"none rejects white noise at the {fmt(alpha * 100, 2)}% level")
    out.append(f"The Ljung-Box test of the autocorrelations taken together{mc}: {'; '.join(parts)}; {verdict}.")
    return out


def _seasonal_sentences(report: dict, tests: dict[str, list[dict]]) -> list[str]:
    out = []
    s = report["seasonal"]
    for entry in s["lags"]:
        if entry["outside"]:
            out.append(f"At the seasonal lag {entry['lag']} (period {s['period']}) the autocorrelation is "
                       f"{fmt(entry['value'])}, outside the band.")
    for t in _tests(tests, "seasonal_ljung_box"):
        if t["p_value"] is not None:
            lags = t["details"]["seasonal_lags"]
            subject = (f"The seasonal lags {_and([str(v) for v in lags])} taken together" if len(lags) > 1
                       else f"The seasonal lag {lags[0]} alone")
            verb = ("reject" if len(lags) > 1 else "rejects") if t["reject"] else \
                ("do not reject" if len(lags) > 1 else "does not reject")
            out.append(f"{subject} {verb} white noise (seasonal Ljung-Box {fmt_p(t['p_value'])}).")
    if s["strength"] and s["strength"]["value"] is not None:
        out.append(f"Seasonal strength from an STL decomposition is {fmt(s['strength']['value'], 2)} on a 0-to-1 "
                   "scale.")
    if s["leftover_likely"] is True:
        out.append("Leftover seasonality is likely.")
    elif s["leftover_likely"] is False:
        out.append(f"No sign of leftover seasonality at period {s['period']}.")
    if s["suggested_period"]:
        out.append(f"No period was given; the autocorrelation and periodogram suggest a cycle of about "
                   f"{s['suggested_period']} observations (a suggestion to check, not a test result).")
    return out


def _randomness_sentences(report: dict, tests: dict[str, list[dict]]) -> list[str]:
    out, quiet = [], []
    for t in _tests(tests, "runs"):
        if t["reject"]:
            few = t["statistic"] < 0
            out.append(f"The runs test finds {'fewer' if few else 'more'} runs above and below the median than chance "
                       f"would give ({fmt_p(t['p_value'])}): "
                       + ("values stay on one side for long stretches." if few else "values alternate too often."))
        elif t["reject"] is False:
            quiet.append("runs")
    for t in _tests(tests, "turning_points"):
        if t["reject"]:
            few = t["statistic"] < 0
            out.append(f"There are {'fewer' if few else 'more'} turning points than a random order gives "
                       f"({fmt_p(t['p_value'])}): the series is {'smoother' if few else 'more jagged'} than noise.")
        elif t["reject"] is False:
            quiet.append("turning-point")
    for t in _tests(tests, "cumulative_periodogram"):
        if t["reject"]:
            out.append(f"The cumulative periodogram leaves its band ({fmt_p(t['p_value'])}): some frequencies carry "
                       "more variance than white noise's flat spectrum allows.")
        elif t["reject"] is False:
            quiet.append("cumulative periodogram")
    if quiet:
        out.append(f"The {_and(quiet)} check{'s' if len(quiet) > 1 else ''} find{'' if len(quiet) > 1 else 's'} "
                   "nothing unusual.")
    for t in _tests(tests, "jarque_bera"):
        if t["reject"]:
            out.append(f"The values are not normally distributed (Jarque-Bera {fmt_p(t['p_value'])}, skewness "
                       f"{fmt(t['details']['skewness'], 2)}, kurtosis {fmt(t['details']['kurtosis'], 2)}); this matters "
                       "for prediction intervals, not for whiteness.")
    return out


def cutoff(block: dict, alpha: float) -> int | None:
    """The lag q after which a correlogram "cuts off", or None.

    q (1 to 3) is the run of lags 1..q outside the band; after it no lag may be far
    outside (beyond 3 standard errors) and the count of later lags outside must be
    within chance (binomial probability above alpha). Common practice for reading
    correlograms (Box, Jenkins, Reinsel and Ljung 2015, section 6.2), made explicit here.
    """
    outside, far = set(block["outside"]), set(block["far"])
    q = 0
    while q + 1 in outside:
        q += 1
    later = len(block["lags"]) - q
    if not 1 <= q <= 3 or later < 3 or any(lag > q for lag in far):
        return None
    extra = sum(1 for lag in outside if lag > q)
    if extra and bdtrc(extra - 1, later, alpha) <= alpha:  # P(at least `extra` of `later` by chance)
        return None
    return q


def advice(report: dict, tests: dict[str, list[dict]] | None = None) -> list[dict]:
    """Next steps that follow from the pattern, each with its reason."""
    tests = tests_by_name(report) if tests is None else tests
    out = []
    v = report["verdict"]
    s = report["seasonal"]
    alpha = 1.0 - report["confidence"]
    seasonal_hits = [e for e in s["lags"] if e["outside"]]
    if "seasonal" in v["structure"] or seasonal_hits:
        e = seasonal_hits[0] if seasonal_hits else s["lags"][0]
        out.append({"action": f"Add a seasonal term (a seasonal AR or MA term at lag {s['period']}) or take a "
                              f"seasonal difference at period {s['period']}.",
                    "reason": f"The autocorrelation at seasonal lag {e['lag']} is {fmt(e['value'])}"
                              + (", outside the band." if e["outside"] else ".")})
    ur = report["unit_root"]
    if ur is not None and ur["p_value"] > alpha:
        out.append({"action": "Difference the series once (or model it in differences) and check again.",
                    "reason": f"The autocorrelation decays slowly (r1 = {fmt(report['acf']['values'][0])}) and the "
                              f"augmented Dickey-Fuller test cannot rule out a unit root ({fmt_p(ur['p_value'])})."})
    elif v["white_noise"] is False and "autocorrelation" in v["structure"]:
        p = cutoff(report["pacf"], 1.0 - report["band"]["per_lag_confidence"])
        q = cutoff(report["acf"], 1.0 - report["band"]["per_lag_confidence"])
        if p is not None and q is not None:  # both read as cut-offs: prefer the smaller order (parsimony)
            if p < q:
                q = None
            elif q < p:
                p = None
        if p is not None and q is not None:
            out.append({"action": f"Try an AR({p}) and an MA({q}) model and keep the one whose residuals pass (set "
                                  "model_df to its parameter count).",
                        "reason": f"Both the autocorrelation and the partial autocorrelation stop after lag {p}; the "
                                  "correlograms alone cannot tell the two apart."})
        elif p is not None:
            out.append({"action": f"Add an AR({p}) term (autoregression on the last {p} value{'s' if p > 1 else ''}), "
                                  f"then test the new residuals with model_df = {p + report['model_df']}.",
                        "reason": f"The partial autocorrelation is outside the band at lag{'s' if p > 1 else ''} "
                                  f"1{'' if p == 1 else ' to ' + str(p)} and not beyond it: the pattern of an AR({p})."})
        elif q is not None:
            out.append({"action": f"Add an MA({q}) term (a moving average of the last {q} shock{'s' if q > 1 else ''}), "
                                  f"then test the new residuals with model_df = {q + report['model_df']}; band "
                                  "'bartlett' shows whether the cut-off holds.",
                        "reason": f"The autocorrelation is outside the band at lag{'s' if q > 1 else ''} "
                                  f"1{'' if q == 1 else ' to ' + str(q)} and not beyond it: the pattern of an MA({q})."})
        else:
            out.append({"action": "Model the remaining short-term dependence (an AR or MA term at the lags that stand "
                                  "out), then test the new residuals with model_df set; use band 'bartlett' to judge "
                                  "where an MA cut-off lies.",
                        "reason": v["summary"]})
    if "volatility_clustering" in v["structure"]:
        t = _tests(tests, "mcleod_li")[0]
        out.append({"action": "Model the changing variance (for example an ARCH or GARCH model), or stabilise it "
                              "with a log or Box-Cox transform if the swings grow with the level.",
                    "reason": f"The McLeod-Li test on the squared values rejects ({fmt_p(t['p_value'])}): volatility "
                              "clusters."})
    if any(t["reject"] for t in _tests(tests, "jarque_bera")):
        out.append({"action": "Do not rely on normal-theory prediction intervals; use bootstrap or empirical "
                              "quantile intervals.",
                    "reason": "The Jarque-Bera test rejects normality."})
    if report["n"] < options.SMALL_SAMPLE_N and report["p_values"]["method"] == "asymptotic":
        out.append({"action": "Ask for p_values: \"monte_carlo\" for p-values that hold at this length.",
                    "reason": f"With n = {report['n']} the chi-square approximations are rough."})
    if s["period"] is None and s["suggested_period"]:
        out.append({"action": f"Check whether a cycle of {s['suggested_period']} observations is real and, if so, "
                              "send it as period.",
                    "reason": "The autocorrelation and the periodogram both peak there."})
    elif s["period"] is None:
        out.append({"action": "If the data have a natural cycle (7 for daily, 12 for monthly), send it as period.",
                    "reason": "Without a period no seasonal lag is checked specifically."})
    if v["white_noise"] is True and not out:
        out.append({"action": "Nothing further to model in the autocorrelation; keep checking as new data arrive.",
                    "reason": "No test or spike points to remaining structure at the lags checked."})
    return out


def cautions(report: dict) -> list[str]:
    """The cautions that always apply, and those this report calls for."""
    ex = report["exceedances"]
    out = [
        "A test that does not reject is not proof of white noise: it only says this sample gives no strong "
        "evidence of structure at the lags checked.",
        f"With {report['max_lag']} lags, about {fmt(ex['expected'], 2)} autocorrelations are expected outside a "
        f"{_pct(report['band']['per_lag_confidence'])} band by chance alone; judge single spikes with that in mind. "
        "The verdict adjusts for this; the per-test reject flags do not.",
    ]
    if report["model_df"] == 0:
        out.append("If these values are residuals of a fitted ARMA model, set model_df to its number of "
                   "estimated parameters (p + q); otherwise the portmanteau p-values are too large.")
    elif report["p_values"]["method"] == "monte_carlo":
        out.append("Monte Carlo p-values simulate an i.i.d. series of the same length; they do not reflect the "
                   f"estimation of the model's {report['model_df']} parameters, so they err on the large side.")
    if report["n"] < options.SMALL_SAMPLE_N:
        out.append(f"The series is short (n = {report['n']}): the bands are large-sample approximations and only "
                   "rough here, and the tests have little power to detect weak structure.")
    return out


def _leftover_seasonality(report: dict, tests: dict[str, list[dict]]) -> bool | None:
    s = report["seasonal"]
    if s["period"] is None or not s["lags"]:
        return None
    alpha = 1.0 - report["confidence"]
    seasonal_test = [t for t in _tests(tests, "seasonal_ljung_box") if t["p_value"] is not None]
    return bool("seasonal" in report["verdict"]["structure"] or any(t["p_value"] < alpha for t in seasonal_test)
                and any(e["outside"] for e in s["lags"]))


def interpret(report: dict) -> dict:
    """Fill the verdict, sentences, advice, cautions and test meanings of a numeric report (in place)."""
    for t in report["tests"]:
        t["meaning"] = _meaning(t["name"], t["lag"])
    tests = tests_by_name(report)
    report["verdict"] = verdict(report, tests)
    report["seasonal"]["leftover_likely"] = _leftover_seasonality(report, tests)
    report["interpretation"] = [report["verdict"]["summary"], *sentences(report, tests)]
    report["advice"] = advice(report, tests)
    report["cautions"] = cautions(report)
    if report["n"] < options.SMALL_SAMPLE_N and report["p_values"]["method"] == "asymptotic":
        report["warnings"].append(short_series_warning(report["n"]))
    return report

"""Next steps that follow from the verdict and the correlograms, each with its reason."""
from __future__ import annotations

from scipy.special import bdtrc

from lagsight import options
from lagsight.consult.words import fmt, fmt_p, tests_by_name, tests_named


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
        t = tests_named(tests, "mcleod_li")[0]
        out.append({"action": "Model the changing variance (for example an ARCH or GARCH model), or stabilise it "
                              "with a log or Box-Cox transform if the swings grow with the level.",
                    "reason": f"The McLeod-Li test on the squared values rejects ({fmt_p(t['p_value'])}): volatility "
                              "clusters."})
    if any(t["reject"] for t in tests_named(tests, "jarque_bera")):
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

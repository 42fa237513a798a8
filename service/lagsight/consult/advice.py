"""Next steps that follow from the decision, each with a stable ``code``, the action and its reason.

Codes (documented in /v1/methods and the OpenAPI file; a spreadsheet macro can branch on them), the most
important first: check_outliers, undo_difference, remove_trend, difference, seasonal_difference,
add_seasonal_terms, add_ar_terms, add_ma_terms, add_arma_terms, model_variance, nothing_to_model, then the
secondary ones: robust_intervals, monte_carlo_p_values, check_cycle, give_period.
"""
from __future__ import annotations

from scipy.special import bdtrc

from lagsight import options
from lagsight.consult.decision import Decision
from lagsight.consult.words import and_, below, fmt, fmt_p, plural, tests_by_name


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


#: Every advice code, in the order a list of advice follows.
CODES = ("check_outliers", "undo_difference", "remove_trend", "difference", "seasonal_difference", "add_seasonal_terms",
         "add_ar_terms", "add_ma_terms", "add_arma_terms", "model_variance", "nothing_to_model", "robust_intervals",
         "monte_carlo_p_values", "check_cycle", "give_period")


def order_one(acf: list[float], pacf: list[float], most: int = 4) -> str:
    """"ar" or "ma": which first-order pattern the correlograms at lags 2..4 are closer to.

    AR(1) with phi = r1 implies r_k = r1^k and a partial autocorrelation of 0 beyond lag 1; MA(1) with the
    invertible theta that gives r1 implies r_k = 0 and phi_kk = -(-theta)^k (1 - theta^2) / (1 - theta^(2k + 2))
    beyond lag 1 (Box, Jenkins, Reinsel and Ljung 2015, sections 3.2.4 and 3.3.3). The smaller sum of squared
    differences wins (a minimum-distance choice; common practice, no source for the rule itself). |r1| >= 0.5
    is beyond any MA(1), so it is "ar".
    """
    r1 = acf[0]
    if abs(r1) >= 0.5 or r1 == 0:
        return "ar"
    theta = (1.0 - (1.0 - 4.0 * r1 * r1) ** 0.5) / (2.0 * r1)
    lags = range(2, min(most, len(acf), len(pacf)) + 1)
    ar = sum((acf[k - 1] - r1 ** k) ** 2 + pacf[k - 1] ** 2 for k in lags)
    ma = sum(acf[k - 1] ** 2 + (pacf[k - 1] + (-theta) ** k * (1 - theta ** 2) / (1 - theta ** (2 * k + 2))) ** 2
             for k in lags)
    return "ar" if ar <= ma else "ma"


def _item(code: str, action: str, reason: str) -> dict:
    return {"code": code, "action": action, "reason": reason}


def _short_term(report: dict, d: Decision) -> dict:
    p = cutoff(report["pacf"], 1.0 - report["band"]["per_lag_confidence"])
    q = cutoff(report["acf"], 1.0 - report["band"]["per_lag_confidence"])
    if p is not None and q is not None:  # both read as cut-offs: prefer the smaller order (parsimony)
        p, q = (p, None) if p < q else ((None, q) if q < p else (p, q))
    if (p == q == 1) or (p is None and q is None and d.strongest_lag == 1):
        p, q = (1, None) if order_one(report["acf"]["values"], report["pacf"]["values"]) == "ar" else (None, 1)
    df = report["model_df"]
    if p is not None and q is not None:
        return _item("add_arma_terms", f"Try an AR({p}) and an MA({q}) model and keep the one whose residuals pass "
                                       "(set model_df to its parameter count).",
                     f"Both the autocorrelation and the partial autocorrelation stop after lag {p}; the correlograms "
                     "alone cannot tell the two apart.")
    if p is not None:
        last = "value" if p == 1 else plural(p, "value")
        return _item("add_ar_terms", f"Add an AR({p}) term (autoregression on the last {last}), then "
                                     f"test the new residuals with model_df = {p + df}.",
                     f"The partial autocorrelation is outside the band at lag{'s' if p > 1 else ''} "
                     f"1{'' if p == 1 else ' to ' + str(p)} and not beyond it: the pattern of an AR({p}).")
    if q is not None:
        last = "shock" if q == 1 else plural(q, "shock")
        return _item("add_ma_terms", f"Add an MA({q}) term (a moving average of the last {last}), then "
                                     f"test the new residuals with model_df = {q + df}.",
                     f"The autocorrelation is outside the band at lag{'s' if q > 1 else ''} "
                     f"1{'' if q == 1 else ' to ' + str(q)} and not beyond it: the pattern of an MA({q}).")
    return _item("add_arma_terms", f"Model the remaining short-term dependence (an AR or MA term at the lags that "
                                   f"stand out, strongest at lag {d.strongest_lag}), then test the new residuals with "
                                   "model_df set.",
                 f"The autocorrelation at lag {d.strongest_lag} is {fmt(d.strongest_r, 2)} and the correlograms do not "
                 "cut off cleanly, so neither a pure AR nor a pure MA pattern is clear.")


def _seasonal(report: dict, d: Decision) -> dict:
    s = report["seasonal"]
    m = s["period"]
    values = {e["lag"]: e["value"] for e in s["lags"]}
    r_m, r_2m = values.get(m), values.get(2 * m)
    if r_m is not None and r_2m is not None and r_m >= 0.6 and r_2m >= 0.45:
        return _item("seasonal_difference", f"Take a seasonal difference at period {m} and check again.",
                     f"The autocorrelation stays high at the seasonal lags ({fmt(r_m, 2)} at lag {m}, {fmt(r_2m, 2)} at "
                     f"lag {2 * m}): the seasonal pattern itself wanders.")
    lag = d.strongest_lag if d.mechanism == "seasonal" else m
    value = values.get(lag, values.get(m))
    return _item("add_seasonal_terms", f"Add a seasonal term (a seasonal AR or MA term at lag {m}) and check again.",
                 f"The autocorrelation at the seasonal lag {lag} is " + (f"{fmt(value, 2)}, " if value is not None else "")
                 + "beyond what chance gives at that lag.")


def advice(report: dict, d: Decision) -> list[dict]:
    """The advice list: one item per named structure in order of importance, then the secondary items."""
    tests = tests_by_name(report)
    out = []
    kinds = d.structure
    explained = {"trend", "unit_root", "over_differenced"} & set(kinds)
    for kind in kinds:
        if kind == "outliers":
            where = [f"{i} (robust z {fmt(z, 2)})" for i, z in zip(d.outliers[:5], d.outlier_z[:5])]
            what = "value" if len(d.outliers) == 1 else plural(len(d.outliers), "value")
            out.append(_item("check_outliers", f"Check the {what} at {'index' if len(d.outliers) == 1 else 'indices'} "
                                               f"{and_(where)}{' ...' if len(d.outliers) > 5 else ''}: correct a "
                                               "recording error, or model the event (an intervention term), then "
                                               "check again.",
                             "The ordinary and the rank-based autocorrelations disagree: the reading rests on these "
                             "values."))
        elif kind == "over_differenced":
            out.append(_item("undo_difference", "If the series was differenced, undo the last difference (model it "
                                                "one difference lower) and check again; do not difference again.",
                             f"The lag-1 autocorrelation is {fmt(d.r1, 2)}: a series differenced once too often "
                             "has it near -0.5."))
            out.append(_item("add_ma_terms", "If it was not differenced, add an MA(1) term (a moving average of the "
                                             f"last shock) and test the new residuals with model_df = "
                                             f"{1 + report['model_df']}.",
                             "A strongly negative lag-1 autocorrelation alone is also the pattern of an MA(1) with a "
                             "negative coefficient."))
        elif kind == "trend":
            out.append(_item("remove_trend", "Remove the trend (fit a straight line in time, or send transform "
                                             "{\"detrend\": \"linear\"}) and check what is left; do not difference.",
                             f"The slope is clear ({d.slope_text()}) and what is left "
                             f"around the line is stationary ({d.around_line()}): the level follows a steady trend."))
        elif kind == "unit_root":
            out.append(_item("difference", "Difference the series once (or send transform {\"difference\": 1}) and "
                                           "check again.",
                             f"The autocorrelation decays slowly (r1 = {fmt(d.r1, 2)}) and {d.unit_root_test()}."))
        elif kind == "seasonal":
            out.append(_seasonal(report, d))
        elif kind == "autocorrelation" and not explained and d.horizon > 1:
            out.append(_item("add_arma_terms", f"The forecasting model misses dependence: check its one-step residuals "
                                               "(horizon 1) and add the AR or MA terms they call for, then check the "
                                               f"{d.horizon}-step errors again.",
                             f"The {d.horizon}-step forecast errors are still correlated at lag {d.strongest_lag} "
                             f"(r = {fmt(d.strongest_r, 2)}), beyond the {below(d.horizon)} that such errors "
                             "share by construction."))
        elif kind == "autocorrelation" and not explained:
            out.append(_short_term(report, d))
        elif kind == "volatility_clustering":
            out.append(_item("model_variance", "Model the changing variance (for example an ARCH or GARCH model), or "
                                               "stabilise it with a log or Box-Cox transform if the swings grow with "
                                               "the level.",
                             f"Large and small swings cluster in time (rank test of the magnitudes "
                             f"{fmt_p(d.volatility_p)}) while the values themselves are uncorrelated."))
    if d.white_noise and not out:
        out.append(_item("nothing_to_model", "Nothing further to model in the autocorrelation; keep checking as new "
                                             "data arrive.",
                         (f"Lag {d.max_lag} does not stand out" if d.horizon == d.max_lag else
                          f"No lag {'up to' if d.horizon == 1 else f'from {d.horizon} to'} {d.max_lag} stands out")
                         + " once the number of checks is allowed for "
                         f"(adjusted {fmt_p(d.p_value)})."))
    if any(t["reject"] for t in tests.get("jarque_bera", [])):
        out.append(_item("robust_intervals", "Do not rely on normal-theory prediction intervals; use bootstrap or "
                                             "empirical quantile intervals.", "The Jarque-Bera test rejects normality."))
    if report["n"] < options.SMALL_SAMPLE_N and report["p_values"]["method"] == "asymptotic":
        out.append(_item("monte_carlo_p_values", "Ask for p_values: \"monte_carlo\" for per-test p-values that hold at "
                                                 "this length (the verdict already uses a simulated reference).",
                         f"With n = {report['n']} the chi-square approximations of the individual tests are rough."))
    s = report["seasonal"]
    if s["period"] is None and s["suggested_period"]:
        out.append(_item("check_cycle", f"Check whether a cycle of {s['suggested_period']} observations is real and, "
                                        "if so, send it as period.",
                         "The autocorrelation and the periodogram both peak there."))
    elif s["period"] is None:
        out.append(_item("give_period", "If the data have a natural cycle (7 for daily, 12 for monthly), send it as "
                                        "period.", "Without a period no seasonal lag is checked specifically."))
    return out

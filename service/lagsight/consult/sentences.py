"""Plain sentences with the numbers in them, read off a report and its verdict."""
from __future__ import annotations

from lagsight.consult.decision import Decision
from lagsight.consult.words import (
    and_,
    below,
    fmt,
    fmt_p,
    lag_list,
    pct,
    plural,
    tests_by_name,
    tests_named,
)


def sentences(report: dict, decision: Decision, tests: dict[str, list[dict]] | None = None) -> list[str]:
    """Plain sentences with the numbers in them; none that the numbers do not support."""
    tests = tests_by_name(report) if tests is None else tests
    out = []
    ex, K = report["exceedances"], report["max_lag"]
    band = report["band"]
    width = f" of ±{fmt(band['half_width'])}" if band["half_width"] is not None else ""
    label = {"white_noise": "", "small_sample": " small-sample", "bartlett": " Bartlett",
             "simultaneous": " simultaneous"}[band["kind"]]
    conf = pct(report["confidence"])
    first = report.get("horizon", 1)
    outside = sorted(ex["far"] + ex["marginal"])
    tested = "autocorrelation" if ex["lags_tested"] == 1 else "autocorrelations"
    span = f"lag {K}" if first == K else f"lags {first} to {K}"
    line = (f"{ex['count']} of {ex['lags_tested']} {tested} ({span}) {'falls' if ex['count'] == 1 else 'fall'} "
            f"outside the {conf}{label} band{width}" + (f" (lag{'s' if ex['count'] > 1 else ''} {lag_list(outside)})" if ex["count"] else "")
            + f"; about {fmt(ex['expected'], 2)} would be expected by chance if the series were white noise")
    if ex["count"]:
        line += f", and {ex['count']} or more happen by chance with probability {fmt(ex['chance_probability'], 2)}."
    else:
        line += "."
    out.append(line)
    if ex["far"]:
        out.append(f"Far outside the band (beyond 3 standard errors): lag{'s' if len(ex['far']) > 1 else ''} "
                   f"{lag_list(ex['far'])}"
                   + ("; chance alone rarely produces such spikes." if report["verdict"]["white_noise"] is not True else
                      "; the verdict, which allows for changing variance and extreme values, does not count them."))
    if ex["marginal"]:
        out.append(f"Just outside the band: lag{'s' if len(ex['marginal']) > 1 else ''} {lag_list(ex['marginal'])}; "
                   "single marginal spikes like these are often chance.")
    alpha = 1.0 - report["confidence"]
    out.extend(_portmanteau_sentences(report, alpha, tests))
    out.extend(_seasonal_sentences(report, tests))
    out.extend(_volatility_sentences(decision, tests))
    out.extend(_randomness_sentences(report, tests))
    out.extend(_mechanism_sentences(report, decision, alpha))
    return out


def _volatility_sentences(d: Decision, tests: dict[str, list[dict]]) -> list[str]:
    out = []
    ml = [t for t in tests_named(tests, "mcleod_li") if t["reject"] is not None]
    ml_text = f"; the McLeod-Li test on the squared values gives {fmt_p(ml[0]['p_value'])}" if ml else ""
    if "volatility_clustering" in d.structure:
        out.append(f"Large and small swings come in clusters: the rank test of the magnitudes rejects "
                   f"({fmt_p(d.volatility_p)}){ml_text}. The values are uncorrelated, but their variance changes: "
                   "volatility clustering.")
    elif d.white_noise is False and (d.volatility_p < d.volatility_threshold or any(t["reject"] for t in ml)):
        out.append("The magnitudes of the values are autocorrelated too, but magnitudes of an autocorrelated series "
                   "always are: check for changing variance again on the residuals once the autocorrelation is "
                   "modelled.")
    elif any(t["reject"] for t in ml):
        out.append(f"Taken alone, the McLeod-Li test on the squared values rejects ({fmt_p(ml[0]['p_value'])}); the rank "
                   f"test of the magnitudes, which holds for heavy tails and is part of the verdict, does not "
                   f"({fmt_p(d.volatility_p)} against {fmt(d.volatility_threshold, 2)}), so no volatility clustering "
                   "is claimed.")
    return out


def _mechanism_sentences(report: dict, d: Decision, alpha: float) -> list[str]:
    c = d.checks
    if d.mechanism == "over_differenced":
        return [f"The lag-1 autocorrelation is {fmt(d.r1, 2)}, close to the -0.5 of a series that was differenced "
                "once too often."]
    out = []
    if "outliers" in d.structure:
        out.append(f"The rank-based autocorrelations, which extreme values cannot move much, differ from the ordinary "
                   f"ones by more than 3 standard errors: {plural(len(d.outliers), 'extreme value')} "
                   f"{'changes' if len(d.outliers) == 1 else 'change'} the reading.")
    if "trend" in d.structure:
        out.append(f"The slope of a straight line through the values is clear ({d.slope_text()}) "
                   f"and what is left around it is stationary ({d.around_line()}): a steady trend, not a level that "
                   "wanders.")
    elif "unit_root" in d.structure:
        out.append(f"The autocorrelation decays slowly and {d.unit_root_test()}: the level of the series wanders.")
    elif c.get("adf_p") is not None and c["adf_p"] <= alpha and d.r1 >= 0.5:
        out.append(f"The autocorrelation is persistent, but the augmented Dickey-Fuller test rejects a unit root "
                   f"({fmt_p(c['adf_p'])}): strong but stationary persistence.")
    return out


def _portmanteau_sentences(report: dict, alpha: float, tests: dict[str, list[dict]]) -> list[str]:
    out = []
    done = [t for t in tests_named(tests, "ljung_box") if t["p_value"] is not None]
    for t in tests_named(tests, "ljung_box"):
        if t["p_value"] is None:
            out.append(f"The Ljung-Box test up to lag {t['lag']} could not be computed: {t['note']}")
    if not done:
        return out
    mc = " (Monte Carlo p-values)" if done[0]["method"] == "monte_carlo" else ""
    first = report.get("horizon", 1)
    if first > 1:
        mc = f" from lag {first} on, with Bartlett's variance ({below(first)} not tested)"
    parts = [f"up to lag {t['lag']}: Q = {fmt(t['statistic'])} on {plural(t['df'], 'degree')} of freedom, {fmt_p(t['p_value'])}"
             for t in done]
    rejecting = [str(t["lag"]) for t in done if t["reject"]]
    verdict = (f"taken alone it rejects white noise at the {fmt(alpha * 100, 2)}% level up to "
               f"lag{'s' if len(rejecting) > 1 else ''} {and_(rejecting)}" if rejecting
               else f"none rejects white noise at the {fmt(alpha * 100, 2)}% level")
    if rejecting and report["verdict"]["white_noise"]:
        verdict += (", but the verdict, which allows for the number of lags and checks and for changing variance and "
                    "extreme values, does not count it")
    out.append(f"The Ljung-Box test of the autocorrelations taken together{mc}: {'; '.join(parts)}; {verdict}.")
    return out


def _seasonal_sentences(report: dict, tests: dict[str, list[dict]]) -> list[str]:
    out = []
    s = report["seasonal"]
    for entry in s["lags"]:
        if entry["outside"]:
            out.append(f"At the seasonal lag {entry['lag']} (period {s['period']}) the autocorrelation is "
                       f"{fmt(entry['value'])}, outside the band.")
    for t in tests_named(tests, "seasonal_ljung_box"):
        if t["p_value"] is not None:
            lags = t["details"]["seasonal_lags"]
            subject = (f"The seasonal lags {and_([str(v) for v in lags])} taken together" if len(lags) > 1
                       else f"The seasonal lag {lags[0]} alone")
            verb = ("reject" if len(lags) > 1 else "rejects") if t["reject"] else \
                ("do not reject" if len(lags) > 1 else "does not reject")
            aside = (", but the verdict, which allows for the number of lags and checks, does not count it"
                     if t["reject"] and report["verdict"]["white_noise"] else "")
            out.append(f"{subject} {verb} white noise (seasonal Ljung-Box {fmt_p(t['p_value'])}){aside}.")
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
    for t in tests_named(tests, "runs"):
        if t["reject"]:
            few = t["statistic"] < 0
            out.append(f"The runs test finds {'fewer' if few else 'more'} runs above and below the median than chance "
                       f"would give ({fmt_p(t['p_value'])}): "
                       + ("values stay on one side for long stretches." if few else "values alternate too often."))
        elif t["reject"] is False:
            quiet.append("runs")
    for t in tests_named(tests, "turning_points"):
        if t["reject"]:
            few = t["statistic"] < 0
            out.append(f"There are {'fewer' if few else 'more'} turning points than a random order gives "
                       f"({fmt_p(t['p_value'])}): the series is {'smoother' if few else 'more jagged'} than noise.")
        elif t["reject"] is False:
            quiet.append("turning-point")
    for t in tests_named(tests, "cumulative_periodogram"):
        if t["reject"]:
            out.append(f"The cumulative periodogram leaves its band ({fmt_p(t['p_value'])}): some frequencies carry "
                       "more variance than white noise's flat spectrum allows.")
        elif t["reject"] is False:
            quiet.append("cumulative periodogram")
    if quiet:
        out.append(f"The {and_(quiet)} check{'s' if len(quiet) > 1 else ''} find{'' if len(quiet) > 1 else 's'} "
                   "nothing unusual.")
    for t in tests_named(tests, "jarque_bera"):
        if t["reject"]:
            out.append(f"The values are not normally distributed (Jarque-Bera {fmt_p(t['p_value'])}, skewness "
                       f"{fmt(t['details']['skewness'], 2)}, kurtosis {fmt(t['details']['kurtosis'], 2)}); this matters "
                       "for prediction intervals, not for whiteness.")
    return out

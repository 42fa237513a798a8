"""Verdict, plain-language sentences, advice and cautions, read off a report.

Decision rule (documented in /v1/methods and the README)
---------------------------------------------------------
Let alpha = 1 - confidence and L the number of Ljung-Box lags that have
degrees of freedom. The series is judged *not* white noise when any of those
Ljung-Box p-values is below alpha / L (Bonferroni over the reported lags, so
the rule's false-alarm rate stays near alpha however many lags are reported).
When no Ljung-Box lag has degrees of freedom the verdict is ``null``.
Individual spikes outside the band are described but do not decide alone:
with K lags about alpha * K of them are expected by chance.
"""
from __future__ import annotations

from scipy.stats import binom


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


def verdict(report: dict) -> dict:
    """The verdict object: white_noise (true/false/null), summary, evidence, confidence."""
    alpha = 1.0 - report["confidence"]
    lb = [t for t in report["tests"] if t["name"] == "ljung_box" and t["p_value"] is not None]
    if not lb:
        return {"white_noise": None, "summary": "No judgement: no Ljung-Box lag has degrees of freedom left "
                "after model_df; raise max_lag or check model_df.", "evidence": [], "confidence": "none"}
    threshold = alpha / len(lb)
    rejecting = [t for t in lb if t["p_value"] < threshold]
    evidence = [
        {"source": "ljung_box", "lag": t["lag"], "p_value": t["p_value"], "threshold": threshold,
         "against_white_noise": t["p_value"] < threshold}
        for t in lb
    ]
    if rejecting:
        worst = min(rejecting, key=lambda t: t["p_value"])
        strength = "strong" if worst["p_value"] < threshold / 10 else "moderate"
        summary = (f"Not white noise: autocorrelation remains (Ljung-Box up to lag {worst['lag']}, "
                   f"{fmt_p(worst['p_value'])}).")
        return {"white_noise": False, "summary": summary, "evidence": evidence, "confidence": strength}
    best = min(lb, key=lambda t: t["p_value"])
    strength = "moderate" if best["p_value"] > 0.2 else "weak"
    summary = (f"Consistent with white noise: no significant autocorrelation at the lags checked "
               f"(smallest Ljung-Box {fmt_p(best['p_value'])}).")
    return {"white_noise": True, "summary": summary, "evidence": evidence, "confidence": strength}


def sentences(report: dict) -> list[str]:
    """Plain sentences with the numbers in them; none that the numbers do not support."""
    out = []
    acf, K, conf = report["acf"], report["max_lag"], report["confidence"]
    alpha = 1.0 - conf
    k_out = len(acf["outside"])
    expected = alpha * K
    p_chance = float(binom.sf(k_out - 1, K, alpha)) if k_out else 1.0
    lags = ", ".join(str(v) for v in acf["outside"][:8]) + (" ..." if k_out > 8 else "")
    line = (f"{k_out} of {K} autocorrelations (lags 1 to {K}) fall outside the {_pct(conf)} band of "
            f"±{fmt(report['band']['half_width'])}" + (f" (lags {lags})" if k_out else "") +
            f"; about {fmt(expected, 2)} would be expected by chance if the series were white noise")
    if k_out:
        line += f", and {k_out} or more happen by chance with probability {fmt(p_chance, 2)}."
    else:
        line += "."
    out.append(line)
    for t in report["tests"]:
        if t["name"] != "ljung_box":
            continue
        if t["p_value"] is None:
            out.append(f"The Ljung-Box test up to lag {t['lag']} could not be computed: {t['note']}")
            continue
        verb = "rejects" if t["reject"] else "does not reject"
        out.append(f"The Ljung-Box test of the first {t['lag']} autocorrelations jointly {verb} white noise "
                   f"at the {fmt(alpha * 100, 2)}% level (Q = {fmt(t['statistic'])} on {t['df']} degrees of "
                   f"freedom, {fmt_p(t['p_value'])}).")
    seasonal = report["seasonal"]
    for entry in seasonal["lags"]:
        if entry["outside"]:
            out.append(f"At the seasonal lag {entry['lag']} (period {seasonal['period']}) the autocorrelation is "
                       f"{fmt(entry['value'])}, outside the band: a seasonal pattern may remain.")
    return out


def cautions(report: dict) -> list[str]:
    """The cautions that always apply, and those this report calls for."""
    out = [
        "A test that does not reject is not proof of white noise: it only says this sample gives no strong "
        "evidence of autocorrelation at the lags checked.",
        f"With {report['max_lag']} lags, about {fmt((1 - report['confidence']) * report['max_lag'], 2)} "
        f"autocorrelations are expected outside a {_pct(report['confidence'])} band by chance alone; judge "
        "single spikes with that in mind.",
    ]
    if report["model_df"] == 0:
        out.append("If these values are residuals of a fitted ARMA model, set model_df to its number of "
                   "estimated parameters (p + q); otherwise the portmanteau p-values are too large.")
    if report["n"] < 50:
        out.append(f"The series is short (n = {report['n']}): the bands and chi-square p-values are "
                   "large-sample approximations and are only rough here.")
    return out


def advice(report: dict) -> list[dict]:
    """Next steps that follow from the pattern, each with its reason."""
    out = []
    seasonal_hits = [e for e in report["seasonal"]["lags"] if e["outside"]]
    if seasonal_hits:
        out.append({"action": "Add a seasonal term or take a seasonal difference at the period "
                              f"{report['seasonal']['period']}.",
                    "reason": f"The autocorrelation at seasonal lag {seasonal_hits[0]['lag']} is "
                              f"{fmt(seasonal_hits[0]['value'])}, outside the band."})
    if report["verdict"]["white_noise"] is False and not out:
        out.append({"action": "Model the remaining short-term dependence (for example an AR or MA term) "
                              "and test the new residuals with model_df set.",
                    "reason": report["verdict"]["summary"]})
    if report["seasonal"]["period"] is None:
        out.append({"action": "If the data have a natural cycle (7 for daily, 12 for monthly), send it as period.",
                    "reason": "Without a period no seasonal lag is checked specifically."})
    return out


def interpret(report: dict) -> dict:
    """Fill the verdict, interpretation, advice and cautions of a numeric report (in place)."""
    report["verdict"] = verdict(report)
    report["interpretation"] = [report["verdict"]["summary"], *sentences(report)]
    report["advice"] = advice(report)
    report["cautions"] = cautions(report)
    return report

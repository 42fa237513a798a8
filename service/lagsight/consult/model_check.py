"""The reading of a model check: what the fit's notices mean, and whether the model took the structure out.

The comparison reads only ``verdict.white_noise``, ``verdict.summary``, the ``tests`` entries and ``acf``
of the two reports (before: the series as sent; after: the model's residuals), so it follows whatever
decision rule the reports carry.
"""
from __future__ import annotations

from lagsight.consult.words import fmt, fmt_p, plural

#: Notice kinds of lagsight.engine.arima -> what they mean for the caller.
NOTICE_WORDS = {
    "not_converged": "The likelihood maximisation stopped before converging (statsmodels' iteration limit); the "
                     "estimates may not be the maximum-likelihood ones.",
    "start_values": "The usual starting values were not stationary or not invertible and were replaced by zeros; "
                    "this affects only where the optimiser started.",
    "covariance": "The covariance matrix of the estimates could not be computed reliably; the standard errors may "
                  "be wrong (null where not computed). Often a sign of too many terms for the data.",
    "few_observations": "There are too few observations to estimate good starting values; treat the estimates with "
                        "caution.",
    "numerical": "The computation met numerical trouble (an overflow, a division by zero or an invalid value); "
                 "check the estimates.",
    "other": "statsmodels raised a warning while fitting (see detail).",
}


def notes(notices: list[tuple[str, str]]) -> list[dict]:
    """Each notice of the fit as {code, message, detail}; detail is statsmodels' own text."""
    return [{"code": kind, "message": NOTICE_WORDS.get(kind, NOTICE_WORDS["other"]), "detail": text}
            for kind, text in notices]


def snapshot(report: dict) -> dict:
    """The numbers a before/after comparison shows, read defensively from a report."""
    verdict = report.get("verdict") or {}
    acf = report.get("acf") or {}
    lags, values = acf.get("lags") or [], acf.get("values") or []
    spike = None
    pairs = [(lag, v) for lag, v in zip(lags, values) if v is not None]
    if pairs:
        lag, value = max(pairs, key=lambda p: abs(p[1]))
        spike = {"lag": lag, "value": value}
    boxes = [t for t in report.get("tests") or [] if t.get("name") == "ljung_box" and t.get("p_value") is not None]
    smallest = min(boxes, key=lambda t: t["p_value"]) if boxes else None
    return {
        "white_noise": verdict.get("white_noise"),
        "summary": verdict.get("summary"),
        "largest_spike": spike,
        "ljung_box": {"lag": smallest["lag"], "df": smallest.get("df"), "p_value": smallest["p_value"]}
        if smallest else None,
        "n": report.get("n"),
    }


def _numbers(side: dict) -> str:
    parts = []
    if side["largest_spike"]:
        parts.append(f"largest spike r{side['largest_spike']['lag']} = {fmt(side['largest_spike']['value'])}")
    if side["ljung_box"]:
        parts.append(f"smallest Ljung-Box {fmt_p(side['ljung_box']['p_value'])} at lag {side['ljung_box']['lag']}")
    return "; ".join(parts)


def comparison(before: dict, after: dict, label: str) -> dict:
    """Before/after numbers, whether the model took the structure out (null when there was none to take, or
    no judgement), and a sentence that says so."""
    b, a = snapshot(before), snapshot(after)
    was, now = b["white_noise"], a["white_noise"]
    if was is False and now is True:
        removed, sentence = True, (
            f"{label} took the structure out: the series was not white noise ({_numbers(b)}), its residuals show no "
            f"significant autocorrelation ({_numbers(a)}). Not rejecting is not proof that nothing is left.")
    elif now is False:
        removed = False
        sentence = (f"Structure remains after {label}: {a['summary']} ({_numbers(a)})." if was is False else
                    f"{label} left structure that the series itself did not show: {a['summary']} ({_numbers(a)}); "
                    "a differencing or a term the data do not need can introduce autocorrelation.")
    elif was is True and now is True:
        removed, sentence = None, (
            f"There was no structure to take out: neither the series ({_numbers(b)}) nor the residuals of {label} "
            f"({_numbers(a)}) show significant autocorrelation.")
    else:
        removed, sentence = None, (
            f"No judgement on one side: before, {b['summary']} After {label}: {a['summary']}")
    return {"before": b, "after": a, "structure_removed": removed, "sentence": sentence}


def cautions(searched: bool, arma_terms: int) -> list[str]:
    """What to keep in mind when reading the residuals' diagnosis."""
    out = [f"The residual tests lose {plural(arma_terms, 'degree')} of freedom for the fitted AR and MA terms (model_df); "
           "the chi-square p-values are large-sample approximations.",
           "A test that does not reject is not proof that the residuals are white noise, only that no structure "
           "was found at the lags checked."]
    if searched:
        out.append("The model was chosen by AICc on the same data, so its residuals look somewhat whiter than "
                   "those of a model fixed in advance would.")
    return out

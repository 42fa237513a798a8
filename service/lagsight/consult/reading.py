"""The reading of one report, derived from its decision: verdict, sentences, advice, cautions, test meanings."""
from __future__ import annotations

from lagsight import options
from lagsight.consult.advice import advice
from lagsight.consult.cautions import cautions, short_series_warning
from lagsight.consult.decision import Decision
from lagsight.consult.sentences import sentences
from lagsight.consult.words import below, meaning, tests_by_name


def interpret(report: dict, decision: Decision) -> dict:
    """Fill the verdict, sentences, advice, cautions and test meanings of a numeric report (in place)."""
    h = report.get("horizon", 1)
    for t in report["tests"]:
        t["meaning"] = meaning(t["name"], t["lag"])
        if h > 1 and "from_lag" in t["details"]:
            t["meaning"] += f" Summed from lag {h}: {below(h)} {'is' if h == 2 else 'are'} not tested (horizon {h})."
    tests = tests_by_name(report)
    report["verdict"] = decision.verdict()
    s = report["seasonal"]
    s["leftover_likely"] = None if s["period"] is None or not s["lags"] else "seasonal" in decision.structure
    report["interpretation"] = [report["verdict"]["summary"], *sentences(report, decision, tests)]
    report["advice"] = advice(report, decision)
    report["cautions"] = cautions(report, decision)
    if report["n"] < options.SMALL_SAMPLE_N and report["p_values"]["method"] == "asymptotic":
        report["warnings"].append(short_series_warning(report["n"]))
    return report

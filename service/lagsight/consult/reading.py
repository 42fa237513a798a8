"""The reading of one report: verdict, sentences, advice, cautions and test meanings, filled in place."""
from __future__ import annotations

from lagsight import options
from lagsight.consult.advice import advice
from lagsight.consult.cautions import cautions
from lagsight.consult.decision import (
    leftover_seasonality,
    short_series_warning,
    verdict,
)
from lagsight.consult.sentences import sentences
from lagsight.consult.words import meaning, tests_by_name


def interpret(report: dict) -> dict:
    """Fill the verdict, sentences, advice, cautions and test meanings of a numeric report (in place)."""
    for t in report["tests"]:
        t["meaning"] = meaning(t["name"], t["lag"])
    tests = tests_by_name(report)
    report["verdict"] = verdict(report, tests)
    report["seasonal"]["leftover_likely"] = leftover_seasonality(report, tests)
    report["interpretation"] = [report["verdict"]["summary"], *sentences(report, tests)]
    report["advice"] = advice(report, tests)
    report["cautions"] = cautions(report)
    if report["n"] < options.SMALL_SAMPLE_N and report["p_values"]["method"] == "asymptotic":
        report["warnings"].append(short_series_warning(report["n"]))
    return report

"""Words and numbers for sentences: number formats, lag lists and the one-line meaning of each test."""
from __future__ import annotations

from functools import lru_cache

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
def meaning(name: str, lag: int | None) -> str:
    """The one-line meaning of a test at a lag (a handful of distinct strings, formatted once each)."""
    return MEANINGS[name].format(lag=lag)


def below(h: int) -> str:
    """The lags below a horizon h > 1 in words: "lag 1" or "lags 1 to h - 1"."""
    return "lag 1" if h == 2 else f"lags 1 to {h - 1}"


def fmt(x: float, digits: int = 3) -> str:
    """A number for a sentence: 3 significant digits, no exponent for everyday sizes."""
    if x == 0:
        return "0"
    if abs(x) >= 1e5 or abs(x) < 1e-3:
        return f"{x:.{digits - 1}e}"
    return f"{x:.{digits}g}"


def fmt_p(p: float) -> str:
    return "p < 0.001" if p < 0.001 else f"p = {p:.3f}"


def pct(confidence: float) -> str:
    return f"{confidence * 100:g}%"


def lag_list(lags: list[int], most: int = 8) -> str:
    return ", ".join(str(v) for v in lags[:most]) + (" ..." if len(lags) > most else "")


def and_(items: list[str]) -> str:
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]


def tests_by_name(report: dict) -> dict[str, list[dict]]:
    """The report's test entries grouped by test name, in report order (one pass over the list)."""
    grouped: dict[str, list[dict]] = {}
    for t in report["tests"]:
        grouped.setdefault(t["name"], []).append(t)
    return grouped


def tests_named(tests: dict[str, list[dict]], name: str) -> list[dict]:
    return tests.get(name) or []


def plural(count: int | float, noun: str, plural_form: str | None = None) -> str:
    """'1 autocorrelation', '2 autocorrelations', '0.5 autocorrelations': the count and the noun agree."""
    many = plural_form or (noun[:-1] + "ies" if noun.endswith("y") and noun[-2:-1] not in "aeiou" else noun + "s")
    shown = f"{count:g}" if isinstance(count, float) else str(count)
    return f"{shown} {noun if count == 1 else many}"

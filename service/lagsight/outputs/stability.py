"""The answer of POST /v1/stability: one entry per window, the changes found, the reading and chart data.

Every key is always present; what was not computed is null (a window that could not be diagnosed has
its ``error`` and null numbers)."""
from __future__ import annotations

import math

import numpy as np

from lagsight.consult import stability as reading
from lagsight.engine.bands import normal_quantile
from lagsight.engine.changepoints import MIN_BLOCKS, STATISTICS, Change


def _finite(x) -> float | None:
    return float(x) if x is not None and math.isfinite(x) else None


def _ljung_box(report: dict) -> tuple[int | None, float | None]:
    """The Ljung-Box entry at the largest lag that has a p-value (read defensively)."""
    entries = [t for t in report.get("tests") or [] if t.get("name") == "ljung_box" and t.get("p_value") is not None]
    if not entries:
        return None, None
    last = max(entries, key=lambda t: t["lag"])
    return last["lag"], last["p_value"]


def window_entry(index: int, start: int, width: int, values: np.ndarray, labels: list[str] | None,
                 report: dict | None, error: str | None) -> dict:
    observed = values[~np.isnan(values)]
    entry = {"index": index, "start": start, "end": start + width,
             "start_time": labels[start] if labels else None, "end_time": labels[start + width - 1] if labels else None,
             "n": None, "white_noise": None, "summary": None, "lag1_autocorrelation": None, "ljung_box_lag": None,
             "ljung_box_p": None, "variance": _finite(float(observed.var(ddof=1))) if observed.size > 1 else None,
             "error": error}
    if report is not None:
        verdict = report.get("verdict") or {}
        acf = (report.get("acf") or {}).get("values") or [None]
        lag, p = _ljung_box(report)
        entry.update(n=report.get("n"), white_noise=verdict.get("white_noise"), summary=verdict.get("summary"),
                     lag1_autocorrelation=acf[0], ljung_box_lag=lag, ljung_box_p=p)
    return entry


def change_block(stats: dict | None, changes: list[Change], width: int, length: int, labels: list[str] | None,
                 alpha: float) -> dict:
    """The change reading: method, blocks, level and the changes found (null with a note when not computed)."""
    blocks = length // width
    out = {"method": "binary segmentation of block statistics with a permutation CUSUM test",
           "statistics": list(STATISTICS), "block": width, "blocks": blocks, "left_out": length - blocks * width,
           "level": alpha / len(STATISTICS), "found": None, "block_values": None, "note": None}
    if stats is None:
        out["note"] = (f"it needs at least {MIN_BLOCKS} blocks of {width} values ({MIN_BLOCKS * width} values); "
                       f"the series has {length}.")
        return out
    found = []
    for c in changes:
        index = c.boundary * width
        found.append({"kind": reading.KINDS[c.statistic], "statistic": c.statistic, "index": index,
                      "time": labels[index] if labels else None, "p_value": c.p_value, "before": c.before,
                      "after": c.after, "rank": c.rank})
    out["found"] = found
    out["block_values"] = {name: values.tolist() for name, values in stats.items()}
    return out


def chart(windows: list[dict], width: int, confidence: float, labels: list[str] | None, changes: dict) -> dict:
    """Series for a chart of the windows, each drawn at its last value."""
    half = normal_quantile(confidence) / math.sqrt(width)
    return {
        "x": [w["end_time"] if labels else w["end"] - 1 for w in windows],
        "x_kind": "time" if labels else "index",
        "lag1_autocorrelation": [w["lag1_autocorrelation"] for w in windows],
        "lower": -half, "upper": half,
        "variance": [w["variance"] for w in windows],
        "ljung_box_p": [w["ljung_box_p"] for w in windows],
        "white_noise": [w["white_noise"] for w in windows],
        "changes": [{"kind": c["kind"], "x": c["time"] if labels else c["index"]} for c in changes["found"] or []],
    }


def answer(name, n: int, width: int, step: int, confidence: float, windows: list[dict], changes: dict,
           labels: list[str] | None) -> dict:
    counts = {"windows": len(windows), "white_noise": 0, "not_white_noise": 0, "undetermined": 0, "errors": 0}
    for w in windows:
        key = "errors" if w["error"] else {True: "white_noise", False: "not_white_noise"}.get(w["white_noise"],
                                                                                             "undetermined")
        counts[key] += 1
    return {"name": name, "n": n, "window": width, "step": step, "counts": counts, "windows": windows,
            "changes": changes, "reading": reading.reading(windows, width, step, changes),
            "chart": chart(windows, width, confidence, labels, changes),
            "cautions": reading.cautions(len(windows), confidence)}

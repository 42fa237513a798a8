"""The reading of a stability check: how many windows show structure, and when the structure or the
variance changed. Reads only each window's ``white_noise`` and the changes found by
:mod:`lagsight.engine.changepoints`."""
from __future__ import annotations

import math

from lagsight.consult.words import fmt, fmt_p, pct, plural

KINDS = {"lag1_autocorrelation": "structure", "log_variance": "variance"}


def _where(entry: dict) -> str:
    return f"{entry['time']} (index {entry['index']})" if entry.get("time") else f"index {entry['index']}"


def _change_sentence(change: dict) -> str:
    if change["kind"] == "structure":
        return (f"The structure changed near {_where(change)}: the lag-1 autocorrelation of the blocks averaged "
                f"{fmt(change['before'])} before and {fmt(change['after'])} after (permutation CUSUM "
                f"{fmt_p(change['p_value'])}).")
    ratio = math.exp(change["after"] - change["before"])
    return (f"The variance changed near {_where(change)}: about {fmt(ratio)} times what it was before "
            f"(permutation CUSUM {fmt_p(change['p_value'])}).")


def reading(windows: list[dict], window: int, step: int, changes: dict) -> list[str]:
    """Sentences: the windows judged not white noise, then each change found (or that none was)."""
    judged = [w for w in windows if w["error"] is None]
    flagged = [w for w in judged if w["white_noise"] is False]
    out = []
    span = f"{len(windows)} windows of {window} values (a new one every {step})"
    if flagged:
        first = flagged[0]
        when = first["start_time"] or f"index {first['start']}"
        out.append(f"{len(flagged)} of the {span} are judged not white noise; the first starts at {when}.")
    elif judged:
        out.append(f"None of the {span} is judged not white noise.")
    failed = len(windows) - len(judged)
    if failed:
        out.append(f"{plural(failed, 'window')} could not be diagnosed (see {'its' if failed == 1 else 'their'} error).")
    if changes["found"] is None:
        out.append(f"No change reading: {changes['note']}")
    elif not changes["found"]:
        out.append(f"No change in the lag-1 autocorrelation or the variance was found over {changes['blocks']} "
                   f"blocks of {changes['block']} values.")
    else:
        out.extend(_change_sentence(c) for c in changes["found"])
    return out


def cautions(count: int, confidence: float) -> list[str]:
    alpha = 1.0 - confidence
    return [
        f"Each window is tested at the {pct(confidence)} level: with {count} windows about {fmt(alpha * count, 2)} "
        "would be flagged by chance if nothing changed, and overlapping windows share values, so chance flags "
        "come in runs.",
        "A change is placed to within about one window, and a change shorter than a window or within a window or "
        "two of either end is hard to see. Not finding a change is not proof that none happened; the change "
        "reading reports a change in about 4 to 7% of stable series (measured; see /v1/methods).",
    ]

"""The reading of a driver check: does the driver still move with the series, at which lags, which way,
and what to do about it. The judgement rule is in :mod:`lagsight.engine.crosscorrelation`."""
from __future__ import annotations

from lagsight.consult.words import fmt, fmt_p, lag_list


def direction(key_lags: list[int]) -> str | None:
    """driver_leads (all key lags > 0), series_leads (all < 0), same_time (only 0) or mixed."""
    if not key_lags:
        return None
    if all(k > 0 for k in key_lags):
        return "driver_leads"
    if all(k < 0 for k in key_lags):
        return "series_leads"
    return "same_time" if set(key_lags) == {0} else "mixed"


_WAY = {
    "driver_leads": "the driver leading (its earlier values move with the series now)",
    "series_leads": "the series leading (the driver follows the series: a feedback, not a cause)",
    "same_time": "at the same time",
    "mixed": "at lags on both sides (the driver leads at some, follows at others)",
}


def reading(name: str, moves: bool, key_lags: list[int], values: dict[int, float], haugh_p: float,
            largest: dict, lags: int) -> list[str]:
    if moves:
        spikes = ", ".join(f"{k} (r = {fmt(values[k])})" for k in key_lags)
        return [f"{name} still moves with the series: the prewhitened cross-correlation stands out at lag{'s' if len(key_lags) > 1 else ''} {spikes}, "
                f"{_WAY[direction(key_lags)]}. Haugh's joint test {fmt_p(haugh_p)}; largest spike "
                f"{fmt_p(largest['p_value'])} over {lags} lags."]
    return [f"{name} shows no link with the series beyond chance: Haugh's joint test {fmt_p(haugh_p)}; the largest "
            f"cross-correlation is r = {fmt(largest['value'])} at lag {largest['lag']} ({fmt_p(largest['p_value'])} "
            f"over {lags} lags). Not finding a link is not proof that there is none."]


def advice(name: str, moves: bool, key_lags: list[int]) -> list[dict]:
    if not moves:
        return [{"action": f"No need to add {name} on this evidence.",
                 "reason": "Neither the joint test nor the largest cross-correlation stands out from chance."}]
    out = []
    leading = sorted(k for k in key_lags if k > 0)
    if leading:
        out.append({"action": f"Add {name} as a regressor at lag{'s' if len(leading) > 1 else ''} {lag_list(leading)} (its value that many steps "
                              "earlier), then check the new residuals with model_df raised by the coefficients added.",
                    "reason": "The driver's earlier values still move with the series after prewhitening."})
    if 0 in key_lags:
        out.append({"action": f"Add {name} at lag 0 only if its value is known when the forecast is made; "
                              "otherwise it has to be forecast too.",
                    "reason": "The driver and the series move together at the same time."})
    following = sorted((k for k in key_lags if k < 0), reverse=True)
    if following:
        out.append({"action": f"Do not expect {name} to help forecast the series at lag{'s' if len(following) > 1 else ''} "
                              f"{lag_list([-k for k in following])} after the series: it follows the series there.",
                    "reason": "Negative lags pair the series with later driver values: the link runs from the series "
                              "to the driver (feedback)."})
    return out


def cautions(drivers: int, lags: int, confidence: float) -> list[str]:
    alpha = 1.0 - confidence
    return [
        f"With {lags} lags per driver about {fmt(alpha * lags, 2)} fall outside the per-lag band by chance; the "
        "judgement uses Haugh's joint test and the largest spike, each at half the level.",
        "The band +-z/sqrt(n) relies on the driver being whitened by its AR model; it is approximate for short "
        "series, and a cross-correlation shows association, not cause.",
        *([f"With {drivers} drivers, each judged at the {fmt(alpha, 2)} level, about {fmt(alpha * drivers, 2)} "
           "would be flagged by chance if none were linked."] if drivers > 1 else []),
    ]

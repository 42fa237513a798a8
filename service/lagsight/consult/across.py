"""The reading across the series of a batch: false-discovery-rate adjusted values and what they say.

With 10,000 series checked at 95%, about 500 are flagged by chance alone even if every one is white noise.
Each series' ``verdict.tail_p_value`` is adjusted across the batch by the Benjamini-Hochberg step-up procedure
[1]_: q_(i) = min over j >= i of m p_(j) / j. That p-value is the verdict's own adjusted p-value where its
simulated null resolves it, and beyond (below twice the table's resolution) the normal tails of the largest
robust spike over every lag and of the rank spike, which hold far out, unlike the chi-square tail of a Ljung-Box
statistic at moderate n. A series "stands out" when its own verdict flags it and its q-value is at most the rate
(1 - confidence of the request): the expected share of false discoveries among the series that stand out is
then at most the rate.

The procedure controls that share when the series are independent or positively dependent (PRDS, [2]_); series
that move together in other ways (one shock hitting many stores) make it approximate.

References
----------
.. [1] Benjamini, Y. and Hochberg, Y. (1995). Controlling the false discovery rate: a practical and powerful
   approach to multiple testing. Journal of the Royal Statistical Society B 57, 289-300.
.. [2] Benjamini, Y. and Yekutieli, D. (2001). The control of the false discovery rate in multiple testing under
   dependency. Annals of Statistics 29, 1165-1188.
"""
from __future__ import annotations

import numpy as np

from lagsight.consult.words import fmt, plural

ASSUMPTION = ("Benjamini-Hochberg holds the expected share of false discoveries at the rate when the series are "
              "independent or positively dependent; series that move together in other ways make it approximate.")
#: At most this many ids are listed in the reading (the q-values themselves cover every series).
MAX_LISTED = 1000


def q_values(p: list[float]) -> list[float]:
    """Benjamini-Hochberg adjusted values (q-values) of p, in the given order."""
    m = len(p)
    if not m:
        return []
    arr = np.asarray(p, dtype=np.float64)
    order = np.argsort(arr, kind="stable")
    ranked = arr[order] * m / np.arange(1, m + 1)
    q = np.minimum.accumulate(ranked[::-1])[::-1]
    out = np.empty(m)
    out[order] = np.minimum(q, 1.0)
    return out.tolist()


def reading(ids: list, verdicts: list[dict], alphas: list[float], rate: float) -> tuple[dict, list[float]]:
    """The batch-level reading and each analysed series' q-value (same order as ``ids``)."""
    q = q_values([v["tail_p_value"] for v in verdicts])
    flagged = sum(1 for v in verdicts if v["white_noise"] is False)
    chance = float(sum(alphas))
    # A series stands out when its own verdict flags it and it survives the adjustment: the adjustment only
    # ever removes series from those flagged one by one.
    standing = [i for i, qi, v in zip(ids, q, verdicts) if qi <= rate and v["white_noise"] is False]
    text = (f"{plural(flagged, 'series', 'series')} of {len(ids)} {'is' if flagged == 1 else 'are'} called not white "
            f"noise one by one; chance alone would flag about {fmt(chance, 2)} even if all were white noise. After "
            f"the false-discovery adjustment at {fmt(rate * 100, 2)}%, {plural(len(standing), 'series', 'series')} "
            f"{'stands' if len(standing) == 1 else 'stand'} out" + (":" if standing else ".")
            + (" " + ", ".join(str(i) for i in standing[:20]) + (" ..." if len(standing) > 20 else "") + "."
               if standing else ""))
    block = {
        "method": "benjamini_hochberg",
        "rate": rate,
        "p_value": "verdict.tail_p_value",
        "analysed": len(ids),
        "flagged": flagged,
        "expected_by_chance": chance,
        "standing_out": len(standing),
        "standing_out_ids": standing[:MAX_LISTED],
        "reading": text,
        "assumption": ASSUMPTION,
    }
    return block, q


class Tally:
    """A batch's summary as its results come in: counts by verdict, and what :func:`reading` needs."""

    def __init__(self, total: int, rate: float):
        self.counts = {"series": total, "white_noise": 0, "not_white_noise": 0, "undetermined": 0, "errors": 0}
        self.rate = rate
        self.index: list[int] = []
        self.ids: list = []
        self.verdicts: list[dict] = []
        self.alphas: list[float] = []

    def add(self, result: dict, index: int | None = None, alpha: float | None = None) -> None:
        if "error" in result:
            self.counts["errors"] += 1
            return
        verdict = result["verdict"]["white_noise"]
        key = "undetermined" if verdict is None else ("white_noise" if verdict else "not_white_noise")
        self.counts[key] += 1
        self.index.append(index)
        self.ids.append(result["id"])
        whole = result["verdict"]  # only what the reading across series reads is kept (not the evidence)
        self.verdicts.append({"white_noise": whole["white_noise"], "tail_p_value": whole["tail_p_value"]})
        self.alphas.append(alpha)

    def across(self) -> dict:
        """The summary with the false-discovery reading; its q_values in request order (null for errors)."""
        block, q = reading(self.ids, self.verdicts, self.alphas, self.rate)
        q_values: list = [None] * self.counts["series"]
        for i, qi in zip(self.index, q):
            q_values[i] = qi
        return {**self.counts, "false_discovery": {**block, "q_values": q_values}}

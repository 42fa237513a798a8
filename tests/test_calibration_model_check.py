"""Simulation: the residuals of the suggested model are judged white at about the nominal rate.

Seeded AR(1), MA(1) and seasonal AR(1) series of length 200 are sent to POST /v1/model-check with
order "suggested"; the share of residual verdicts "not white noise" is the false-alarm rate of the whole
chain (start order, AICc search, residual diagnosis with model_df = p + q + P + Q). Measured with 300
series of each kind (seed 12345, in-process, one BLAS thread): AR(1) 8/300 (2.7%), MA(1) 8/300 (2.7%),
seasonal AR at period 4 5/300 (1.7%), at period 12 7/300 (2.3%). That is at or below the nominal 5%:
the verdict on i.i.d. series of length 200 is itself at 4.3% (README, calibration), and an order chosen
by AICc on the same data leaves its residuals a little whiter than the true model would (the answer's
cautions say so). Every raw series is judged not white noise, so the check is not passing by
never rejecting.
"""
from __future__ import annotations

import numpy as np
import pytest
from threadpoolctl import threadpool_limits

pytestmark = pytest.mark.slow

N = 200
BURN = 100
#: Series per kind (a smaller run of the 300-series measurement above, to stay within a minute).
RUNS = {"ar1": 120, "ma1": 120, "seasonal_ar12": 80}
#: The nominal level of the verdict (confidence 0.95).
NOMINAL = 0.05


def simulate(kind: str, rng: np.random.Generator) -> np.ndarray:
    """AR(1) phi = 0.6, MA(1) theta = 0.6, or seasonal AR(1) Phi = 0.5 at lag 12, unit normal shocks."""
    e = rng.standard_normal(N + BURN)
    x = np.zeros(N + BURN)
    for t in range(N + BURN):
        if kind == "ar1":
            x[t] = (0.6 * x[t - 1] if t else 0.0) + e[t]
        elif kind == "ma1":
            x[t] = e[t] + (0.6 * e[t - 1] if t else 0.0)
        else:
            x[t] = (0.5 * x[t - 12] if t >= 12 else 0.0) + e[t]
    return x[BURN:]


@pytest.mark.parametrize("kind", list(RUNS))
def test_suggested_model_residuals_are_judged_white_at_about_the_nominal_rate(client, kind):
    rng = np.random.default_rng(12345)
    flagged = raw_flagged = 0
    period = 12 if kind == "seasonal_ar12" else None
    with threadpool_limits(1):  # as in a gunicorn worker (serving/gunicorn_conf.py)
        for _ in range(RUNS[kind]):
            r = client.post("/v1/model-check", json={"values": simulate(kind, rng).tolist(), "order": "suggested",
                                                     "period": period})
            assert r.status_code == 200, r.get_json()
            comparison = r.get_json()["comparison"]
            flagged += comparison["after"]["white_noise"] is False
            raw_flagged += comparison["before"]["white_noise"] is False
    runs = RUNS[kind]
    print(f"\n{kind}: residuals judged not white {flagged}/{runs}; raw series {raw_flagged}/{runs}")
    assert raw_flagged == runs  # the structure is there to be removed
    # At or below the nominal rate, with room for chance: above 8% would mean the chain leaves structure behind
    # (at a true 5%, 120 runs exceed 8% with probability about 0.1; at the measured 2.7%, about 0.001).
    assert flagged <= 0.08 * runs

"""The cost model of ``lagsight.web.budget`` against measured time: ``python -m benchmarks.cost_model``.

Each case is a request of seeded random series (a sine of the period added where the case says
"seasonal", so the seasonal decomposition runs) sent in process to the application with the cost
budget out of the way; the best of ``--repeats`` wall times is printed beside the estimate (cost units
are meant as milliseconds of one core of the benchmark machine). The coefficients in web/budget.py
were set from these cases on the 2-core benchmark machine; on another machine the ratio column says
how far the units are from its milliseconds. ``--quick`` runs a few small cases (the test suite uses it
to keep the script working). Nothing is written.
"""
from __future__ import annotations

import argparse
import time

import numpy as np
from flask import g

from lagsight import create_app
from lagsight.web import budget

from . import workloads

#: name -> (series, shortest length, distinct lengths, period, seasonal, options); a case with lengths
#: drawn at random instead (a realistic batch) is built by :func:`daily_batch`.
CASES = {
    "one short series": (1, 100, 1, None, False, {}),
    "2,000 series of one length 1,000": (2000, 1000, 1, None, False, {}),
    "400 series, 400 lengths 200-599": (400, 200, 400, None, False, {}),
    "400 series of one length 2,000, full": (400, 2000, 1, None, False, {"detail": "full"}),
    "100 series, 100 lengths, max_lag 400": (100, 1000, 100, None, False, {"max_lag": 400}),
    "100 series of 3,000, max_lag 1,500": (100, 3000, 1, None, False, {"max_lag": 1500}),
    "200 seasonal series of one length, period 365": (200, 730, 1, 365, True, {}),
    "100 seasonal series, 100 lengths, period 365": (100, 730, 100, 365, True, {}),
    "10 seasonal series, 10 lengths, period 1,000": (10, 2200, 10, 1000, True, {}),
    "100 seasonal series, 100 lengths, period 12": (100, 200, 100, 12, True, {}),
    "1,000 seasonal series of one length 2,000, period 30": (1000, 2000, 1, 30, True, {}),
    "1,000 series with a Box-Cox estimate": (1000, 500, 1, None, False, {"transform": {"box_cox": "estimate"}}),
    "one series, Monte Carlo 999 x 5,000": (1, 5000, 1, None, False, {"p_values": "monte_carlo", "replicates": 999}),
}
QUICK = ("one short series", "400 series, 400 lengths 200-599", "100 seasonal series, 100 lengths, period 12")


def daily_batch(seed: int = 0) -> dict:
    """2,515 daily series of two to three years (730 to 1,100 points, lengths drawn at random) with a yearly
    period: the batch whose cost was one engine pass and one seasonal decomposition per distinct length."""
    return workloads.daily_batch(seed=seed)


def body(m: int, n: int, distinct: int, period: int | None, seasonal: bool, opts: dict, seed: int = 0) -> dict:
    rng = np.random.default_rng(seed)
    series = []
    for i in range(m):
        length = n + i % distinct
        x = rng.standard_normal(length)
        if seasonal:
            x += 3 * np.sin(2 * np.pi * np.arange(length) / period)
        if "transform" in opts:
            x = np.exp(0.3 * x) * 10  # positive, for the Box-Cox estimate
        series.append({"id": i, "values": np.round(x, 4).tolist()})
    return {"series": series, **({"period": period} if period else {}), "detail": "brief", **opts}


def estimate_of(app, request_body: dict) -> float:
    """The estimate the batch route makes for this body (its own preparation, no engine)."""
    from lagsight.inputs.schema import BatchRequest
    from lagsight.web.batch import _box_cox_requests, prepare_items

    with app.test_request_context("/v1/diagnostics/batch", method="POST"):
        g.started = time.perf_counter()
        shared = BatchRequest().load(request_body)
        raw = shared.pop("series")
        estimate = budget.box_cox_estimates(budget.Estimate(), *_box_cox_requests(raw, shared))
        prepared, _, _ = prepare_items(raw, shared, app.config)
        return budget.engine_work(estimate, prepared, shared["detail"]).total


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--quick", action="store_true")
    ns = ap.parse_args(argv)
    app = create_app({"TESTING": True, "LOG_LEVEL": "WARNING", "MAX_COST": 10**9, "MAX_LAG": 5000,
                      "REQUEST_DEADLINE": 3000.0, "TIMEOUT": 6000})
    client = app.test_client()
    names = QUICK if ns.quick else (*CASES, "2,515 daily series, 730-1,100 points, period 365")
    print(f"{'case':<52} {'estimate':>9} {'measured ms':>12} {'ratio':>6}")
    for name in names:
        request_body = body(*CASES[name]) if name in CASES else daily_batch()
        units = estimate_of(app, request_body)
        best = float("inf")
        for _ in range(1 if ns.quick else ns.repeats):
            started = time.perf_counter()
            r = client.post("/v1/diagnostics/batch", json=request_body)
            best = min(best, time.perf_counter() - started)
            assert r.status_code == 200, r.get_data()[:300]
        print(f"{name:<52} {units:>9.0f} {best * 1000:>12.0f} {units / (best * 1000):>6.2f}")


if __name__ == "__main__":
    main()

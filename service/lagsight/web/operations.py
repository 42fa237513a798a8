"""Operations endpoints: readiness and Prometheus metrics."""
from __future__ import annotations

import math
import time

import numpy as np
from flask import Blueprint, Response

from lagsight.problems import Problem
from lagsight.version import __version__
from lagsight.web import metrics
from lagsight.web.responses import json_response

bp = Blueprint("operations", __name__)

#: NIST StRD NumAcc1 (10000001, 10000003, 10000002): certified lag-1 autocorrelation -0.5.
_CHECK_SERIES = np.array([[10000001.0, 10000003.0, 10000002.0]])
_CHECK_R1 = -0.5


def self_check() -> dict:
    """Run one tiny analysis through the engine and compare it with its certified value."""
    from lagsight.engine.analysis import (  # imported here so a broken engine fails readiness, not start-up
        Spec,
        analyse,
    )

    started = time.perf_counter()
    spec = Spec(max_lag=1, confidence=0.95, model_df=0, test_lags=(1,), short_lag=1, period=None,
                tests=("ljung_box", "box_pierce"))
    result = analyse(_CHECK_SERIES, spec)
    r1 = float(result.acf[0, 0])
    p = [float(np.ravel(t.p_value)[0]) for t in result.tests]  # (m, L) arrays; one series, one lag here
    ok = abs(r1 - _CHECK_R1) <= 1e-12 and all(math.isfinite(v) and 0.0 <= v <= 1.0 for v in p)
    return {"ok": ok, "lag1_autocorrelation": r1, "seconds": round(time.perf_counter() - started, 6)}


@bp.get("/readyz")
def readyz():
    """Say whether this worker can analyse: the engine imports and a tiny self-check gives the certified value."""
    try:
        check = self_check()
    except Exception as exc:  # any failure of the engine means not ready
        raise Problem("unavailable", f"Engine self-check failed ({type(exc).__name__}).") from None
    if not check["ok"]:
        raise Problem("unavailable", "Engine self-check gave a wrong value; this worker should not take traffic.")
    return json_response({"status": "ready", "version": __version__, "self_check": check})


@bp.get("/metrics")
def prometheus():
    """Expose request counts, latency histograms and series/points analysed in the Prometheus text format."""
    body, content_type = metrics.exposition()
    return Response(body, mimetype=None, content_type=content_type)

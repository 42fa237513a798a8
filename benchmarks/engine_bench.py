"""In-process measurements: the engine and the full report against a statsmodels loop and a bare NumPy floor
(measurement 1), and how time grows with series length and batch size (measurement 5)."""
from __future__ import annotations

import math
import warnings
from dataclasses import replace

import numpy as np
from scipy import fft as sp_fft
from scipy.special import chdtrc

from lagsight import options
from lagsight.engine.analysis import analyse
from lagsight.inputs.series import PreparedSeries
from lagsight.pipeline import BLOCK_POINTS, plan_for, run

from . import timing, workloads


def prepared(x: np.ndarray, period: int | None) -> list[PreparedSeries]:
    n = x.shape[1]
    return [PreparedSeries(row, n, 0, period, "request" if period else None, None, f"sensor-{i}")
            for i, row in enumerate(x)]


def _limits(max_lag: int) -> dict:
    return {"MAX_LAG": max_lag, "MAX_REPLICATES": options.DEFAULT_LIMITS["max_replicates"],
            "MAX_SIMULATED_VALUES": options.DEFAULT_LIMITS["max_simulated_values"]}


_OPTS = {"confidence": options.DEFAULT_CONFIDENCE, "model_df": 0}


def full_reports(x: np.ndarray, max_lag: int, period: int | None) -> list[dict]:
    """What the service does after validation: plan, engine, reports, interpretation."""
    opts = {**_OPTS, "max_lag": max_lag}
    series = prepared(x, period)
    return run([(s, plan_for(s, opts, _limits(max_lag))) for s in series])


def _block_rows(n: int) -> int:
    """Rows per engine block, as the service cuts a group (pipeline.BLOCK_POINTS values per block)."""
    return max(1, BLOCK_POINTS // n)


def engine_only(x: np.ndarray, max_lag: int, period: int | None, seasonal_strength: bool = True):
    """The engine pass alone, with the service's default analyses (every test, bands, periodogram),
    run as the service runs it: one pass per block of ``pipeline.BLOCK_POINTS`` values.

    ``seasonal_strength=False`` leaves out the STL seasonal strength, the one analysis that runs a
    decomposition per series (for series with a seasonal lag outside the band), to show the cost of
    the vectorised rest. Returns the GroupAnalysis of each block.
    """
    spec = plan_for(prepared(x[:1], period)[0], {**_OPTS, "max_lag": max_lag}, _limits(max_lag)).spec
    if not seasonal_strength:
        spec = replace(spec, seasonal_strength=False)
    rows = _block_rows(x.shape[1])
    return [analyse(x[start:start + rows], spec) for start in range(0, x.shape[0], rows)]


def numpy_floor_blocks(x: np.ndarray, max_lag: int, lags: list[int]):
    """The floor computed in the engine's blocks (cache-sized arrays are cheaper for it too)."""
    rows = _block_rows(x.shape[1])
    return [numpy_floor(x[start:start + rows], max_lag, lags) for start in range(0, x.shape[0], rows)]


def numpy_floor(x: np.ndarray, max_lag: int, lags: list[int]):
    """The least a batched ACF + Ljung-Box can cost: centre, one real FFT pair, a cumulative sum, chi-square tails.

    No accuracy safeguards (no rescaling, one-pass mean), no PACF, no Box-Pierce, no bands, no report.
    """
    m, n = x.shape
    d = x - x.mean(axis=1, keepdims=True)
    size = sp_fft.next_fast_len(n + max_lag, real=True)
    spec = sp_fft.rfft(d, n=size, axis=1)
    c = sp_fft.irfft(spec.real**2 + spec.imag**2, n=size, axis=1)[:, : max_lag + 1]
    r = c[:, 1:] / c[:, :1]
    k = np.arange(1, max_lag + 1)
    q = n * (n + 2.0) * np.cumsum(r**2 / (n - k), axis=1)[:, np.asarray(lags) - 1]
    return r, chdtrc(np.asarray(lags), q)


def statsmodels_loop(x: np.ndarray, max_lag: int, lags: list[int], pacf_method: str | None = "ldb"):
    """A Python user's alternative: acf, pacf and acorr_ljungbox (with Box-Pierce) per series.

    ``pacf_method=None`` calls pacf with statsmodels' default method (Yule-Walker, adjusted), as a user
    writes it; ``"ldb"`` (Levinson-Durbin on the biased autocovariance) is the estimator the service
    reports, the same-estimator loop.
    """
    from statsmodels.stats.diagnostic import acorr_ljungbox
    from statsmodels.tsa.stattools import acf, pacf

    out = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for row in x:
            out.append((acf(row, nlags=max_lag, fft=True), pacf(row, nlags=max_lag, **({} if pacf_method is None else {"method": pacf_method})),
                        acorr_ljungbox(row, lags=lags, boxpierce=True)))
    return out


def measure_batch(m: int, n: int, max_lag: int, period: int, repeats: int, default_loop_rows: int) -> dict:
    """Measurement 1: side by side, medians over ``repeats`` rounds."""
    x = workloads.batch(m, n)
    lags = options.portmanteau_lags(n, max_lag, period, 0)
    sub = x[:default_loop_rows]
    cases = {
        "numpy_floor": lambda: numpy_floor(x, max_lag, lags),
        "numpy_floor_blocks": lambda: numpy_floor_blocks(x, max_lag, lags),
        "engine": lambda: engine_only(x, max_lag, period),
        "engine_without_stl": lambda: engine_only(x, max_lag, period, seasonal_strength=False),
        "full_report": lambda: full_reports(x, max_lag, period),
        "statsmodels_loop": lambda: statsmodels_loop(x, max_lag, lags),
        "statsmodels_loop_default_pacf_subset": lambda: statsmodels_loop(sub, max_lag, lags, None),
    }
    times = timing.interleaved(cases, repeats)
    check = engine_only(x[:50], max_lag, period)[0]
    ref = statsmodels_loop(x[:50], max_lag, lags)
    agreement = max(float(np.max(np.abs(check.acf[i] - ref[i][0][1:]))) for i in range(50))
    pacf_agreement = max(float(np.max(np.abs(check.pacf[i] - ref[i][1][1:]))) for i in range(50))
    return {"m": m, "n": n, "max_lag": max_lag, "period": period, "lags": lags, "repeats": repeats,
            "default_loop_rows": default_loop_rows, "times": times,
            "max_abs_diff_acf_vs_statsmodels": agreement, "max_abs_diff_pacf_vs_statsmodels": pacf_agreement}


def mixed_reports(series: list[np.ndarray]) -> list[dict]:
    """Full reports for series of different lengths (each with its default max_lag): one engine pass
    per length, and whatever each new length costs (tables, operators) paid as a worker would."""
    items = []
    for i, row in enumerate(series):
        s = PreparedSeries(row, row.size, 0, None, None, None, f"meter-{i}")
        items.append((s, plan_for(s, _OPTS, _limits(options.DEFAULT_LIMITS["max_lag"]))))
    return run(items)


def measure_mixed(m: int, shortest: int, longest: int, repeats: int) -> dict:
    """m series of lengths drawn between ``shortest`` and ``longest``: a portal's batch of unequal histories."""
    rng = np.random.default_rng(17)
    lengths = rng.integers(shortest, longest + 1, m)
    series = [workloads.long_series(int(n), seed=i) for i, n in enumerate(lengths)]
    t = timing.interleaved({"full_report": lambda: mixed_reports(series)}, repeats)
    return {"m": m, "shortest": shortest, "longest": longest, "distinct_lengths": len(set(lengths.tolist())),
            "full_report": t["full_report"]["median"], "times": t}


def _slope(sizes: list[int], seconds: list[float]) -> float:
    """Least-squares slope of log(time) on log(size)."""
    return float(np.polyfit(np.log(sizes), np.log(seconds), 1)[0])


def measure_scaling(lengths: list[int], batch_sizes: list[int], max_lag: int, batch_n: int, batch_lag: int,
                    repeats: int) -> dict:
    """Measurement 5: one series of growing length; growing batches of short series."""
    by_length = {}
    for n in lengths:
        x = workloads.long_series(n)[None, :]
        t = timing.interleaved({"engine": lambda: engine_only(x, max_lag, None),
                                "full_report": lambda: full_reports(x, max_lag, None)}, repeats)
        by_length[n] = {k: v["median"] for k, v in t.items()}
    by_batch = {}
    for m in batch_sizes:
        x = workloads.batch(m, batch_n)
        t = timing.interleaved({"engine": lambda: engine_only(x, batch_lag, 12),
                                "full_report": lambda: full_reports(x, batch_lag, 12)}, repeats)
        by_batch[m] = {k: v["median"] for k, v in t.items()}
    nlogn = [n * math.log(n) for n in lengths]
    return {
        "max_lag": max_lag, "batch_n": batch_n, "batch_lag": batch_lag, "repeats": repeats,
        "by_length": by_length, "by_batch": by_batch,
        "slope_length": {k: _slope(lengths, [by_length[n][k] for n in lengths]) for k in ("engine", "full_report")},
        "slope_length_nlogn": {k: _slope(nlogn, [by_length[n][k] for n in lengths]) for k in ("engine", "full_report")},
        "slope_batch": {k: _slope(batch_sizes, [by_batch[m][k] for m in batch_sizes]) for k in ("engine", "full_report")},
        # Between the two longest series, where the arithmetic outweighs the fixed cost per call:
        "slope_length_top": {k: _slope(lengths[-2:], [by_length[n][k] for n in lengths[-2:]])
                             for k in ("engine", "full_report")},
        "slope_length_top_nlogn": {k: _slope(nlogn[-2:], [by_length[n][k] for n in lengths[-2:]])
                                   for k in ("engine", "full_report")},
    }


def _per_length(items):
    """pipeline.chunks as before chunking: every block its own engine pass (the comparison case)."""
    return [[block] for block in items]


def measure_daily(m: int, shortest: int, longest: int, period: int, repeats: int, sample: int) -> dict:
    """Measurement 6: the daily batch (workloads.daily_batch) through POST /v1/diagnostics/batch in process
    (Flask's test client: body parsing, checks, the cost estimate, the engine, the brief answer), side by side
    with the same request run one engine pass per length (pipeline.chunks disabled); the first request of a
    fresh application (its verdict null tables and loess tables built) is timed apart. Then ``sample`` series
    through the single route (/v1/diagnostics, full report) against the batch's full answers: verdicts and
    seasonal strengths compared. The body is encoded to JSON bytes once, before the timings, as a caller's
    HTTP client would send it: Python's json module in the test client (``json=``) spent about 0.45 s a request
    on the 2.3 million values, work of the caller and not of the service."""
    from unittest import mock

    import orjson

    from lagsight import create_app, pipeline

    body = workloads.daily_batch(m, shortest, longest, period)
    encoded = orjson.dumps(body)
    app = create_app({"TESTING": True, "LOG_LEVEL": "WARNING", "MAX_COST": 10**9, "REQUEST_DEADLINE": 3000.0,
                      "TIMEOUT": 6000})
    client = app.test_client()

    def batch():
        r = client.post("/v1/diagnostics/batch", data=encoded, content_type="application/json")
        assert r.status_code == 200, r.get_data()[:300]

    def per_length():
        with mock.patch.object(pipeline, "chunks", _per_length):
            batch()

    first = timing.seconds(batch)
    times = timing.interleaved({"batch": batch, "one_pass_per_length": per_length}, repeats)
    lengths = [len(s["values"]) for s in body["series"]]
    picked = np.random.default_rng(1).choice(len(lengths), size=min(sample, len(lengths)), replace=False).tolist()
    full = client.post("/v1/diagnostics/batch", json={**body, "detail": "full"}).get_json()["results"]
    verdicts_equal, strength_diffs, strengths = 0, [], 0
    for i in picked:
        one = client.post("/v1/diagnostics", json={"period": period, "values": body["series"][i]["values"]}).get_json()
        verdicts_equal += one["verdict"] == full[i]["verdict"]
        a, b = one["seasonal"]["strength"]["value"], full[i]["seasonal"]["strength"]["value"]
        if a is not None and b is not None:
            strengths += 1
            strength_diffs.append(abs(a - b))
        elif (a is None) != (b is None):
            strength_diffs.append(float("inf"))
    return {"m": m, "shortest": shortest, "longest": longest, "period": period, "repeats": repeats,
            "distinct_lengths": len(set(lengths)), "points": sum(lengths), "first_request": first, "times": times,
            "sample": len(picked), "verdicts_equal": verdicts_equal, "strengths_compared": strengths,
            "max_strength_difference": max(strength_diffs, default=0.0)}

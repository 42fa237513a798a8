"""A batch of many lengths answers as the single route does, series by series.

The batch gathers small blocks (one per length) into one engine pass over several groups
(lagsight.engine.family): the partial autocorrelations are the same bits, and the seasonal strengths
come from one STL over the rows of every length (stl.decompose_many), which agrees with each series'
own decomposition to rounding (about 1e-15 of the series' scale). Strengths are reported to 6 decimals,
so they are compared within 1e-6 (one unit of the last reported decimal: a value that lies within
rounding of a half-unit boundary may round the other way); everything else must be equal. Data are
seeded random series (noise, AR(1), a sine of the period added), not references.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy.signal import lfilter

from lagsight import create_app
from lagsight.engine import seasonality, stl
from lagsight.outputs.shared import merged
from lagsight.pipeline import BLOCK_POINTS, chunks

STRENGTH_TOLERANCE = 1e-6  # one unit of the 6th decimal, the reported precision (seasonality.DECIMALS)


def _series(lengths: list[int], period: int, seed: int) -> list[list[float]]:
    rng = np.random.default_rng(seed)
    out = []
    for i, n in enumerate(lengths):
        e = rng.standard_normal(n)
        x = lfilter([1.0], [1.0, -0.6], e) if i % 3 == 1 else e  # a third AR(1)
        if i % 3 != 2:  # a third without a cycle
            x = x + (1.0 + i % 2) * np.sin(2 * np.pi * np.arange(n) / period)
        out.append(np.round(10 + x, 3).tolist())
    return out


def _without_strength(result: dict) -> dict:
    result = dict(result)
    result["seasonal"] = {**result["seasonal"], "strength": None}
    return result


@pytest.mark.parametrize("lengths, period", [
    ([730, 731, 732, 733, 734] * 2, 365),  # daily series with a yearly period (one null table: same short lag)
    (list(range(200, 240)), 12),  # monthly-like series of 40 lengths
])
def test_a_batch_of_many_lengths_answers_as_the_single_route(lengths, period):
    client = create_app({"TESTING": True}).test_client()
    values = _series(lengths, period, seed=len(lengths) + period)
    batch = client.post("/v1/diagnostics/batch", json={
        "period": period, "series": [{"id": f"branch-{i}", "values": v} for i, v in enumerate(values)]})
    assert batch.status_code == 200
    answer = batch.get_json()
    # each series' whole report: its result with the values the batch shares put back (outputs/shared.py)
    results = [merged(r, answer["shared"]) for r in answer["results"]]
    strengths = 0
    for i, v in enumerate(values):
        single = client.post("/v1/diagnostics", json={"period": period, "values": v})
        assert single.status_code == 200
        one, many = single.get_json(), results[i]
        assert many["id"] == f"branch-{i}"
        assert many["verdict"] == one["verdict"]
        a, b = one["seasonal"]["strength"]["value"], many["seasonal"]["strength"]["value"]
        assert (a is None) == (b is None)
        if a is not None:
            strengths += 1
            assert abs(a - b) <= STRENGTH_TOLERANCE
        assert {k: v for k, v in _without_strength(many).items() if k != "id"} == _without_strength(one)
    assert strengths >= len(lengths) // 2  # the decomposition ran for the series with a cycle


def test_the_batch_of_many_lengths_runs_as_few_chunks():
    """2,500 lengths of about 1,000 values fill about BLOCK_POINTS values per chunk."""
    from lagsight.engine.analysis import Spec
    from lagsight.pipeline import Plan

    planned = [(Plan(n, Spec(365, 0.95, 0, (n // 5, 365), n // 5, 365)), [i]) for i, n in enumerate(range(730, 1100))]
    gathered = chunks(planned)
    assert sum(len(c) for c in gathered) == len(planned)
    assert len(gathered) <= 2 + sum(730 + i for i in range(370)) // BLOCK_POINTS
    assert all(sum(p.n * len(m) for p, m in c) <= BLOCK_POINTS for c in gathered)


@pytest.mark.parametrize("lengths, period", [([731, 800, 1099], 365), ([25, 26, 37, 121, 400], 12),
                                             ([15, 16, 40], 7)])
def test_decompose_many_agrees_with_decompose(lengths, period):
    # Reference: stl.decompose, which tests/test_engine_reference.py checks against statsmodels' STL at 1e-11;
    # the joint decomposition agrees with it far closer (windows longer than the series included).
    rng = np.random.default_rng(sum(lengths))
    xs = [10 + np.sin(2 * np.pi * np.arange(n) / period) + 0.5 * rng.standard_normal((3, n)) for n in lengths]
    for x, (seasonal, trend) in zip(xs, stl.decompose_many(xs, period)):
        alone_seasonal, alone_trend = stl.decompose(x, period)
        np.testing.assert_allclose(seasonal, alone_seasonal, rtol=0, atol=1e-12)
        np.testing.assert_allclose(trend, alone_trend, rtol=0, atol=1e-12)
    many = seasonality.stl_strengths_many(xs, period)
    for x, values in zip(xs, many):
        assert np.abs(values - seasonality.stl_strengths(x, period)).max() <= STRENGTH_TOLERANCE

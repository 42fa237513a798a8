"""The engine's arithmetic for a row does not depend on the other rows of its group.

The batch endpoint stacks series of equal length and options into one 2-D array; a single
request is a group of one. Every kernel must therefore give a row the same bits in both
cases (no path choice by row count, no reduction whose order depends on the row count).
"""
from __future__ import annotations

import numpy as np
import pytest

from lagsight.engine import partial, seasonality
from lagsight.engine.analysis import Spec, analyse
from lagsight.engine.autocorrelation import acf, uses_fft


@pytest.mark.parametrize("n, max_lag", [(120, 24), (500, 34), (500, 100), (3000, 200)])
def test_engine_rows_do_not_depend_on_the_rest_of_the_group(n, max_lag):
    """Every array of a row is bit-identical whether the row is analysed alone or among others
    (both ACF paths: uses_fft picks direct products for the first two shapes, the FFT for the others)."""
    assert uses_fft(n, max_lag) == (max_lag >= 100)
    rng = np.random.default_rng(n + max_lag)
    x = rng.standard_normal((12, n))
    x[4:8] = np.cumsum(x[4:8], axis=1)  # slowly decaying ACF: unit-root check and PACF near 1
    x[8:] += 3.0 * np.sin(2 * np.pi * np.arange(n) / 12)
    spec = Spec(max_lag=max_lag, confidence=0.95, model_df=1, test_lags=(max_lag // 2, max_lag), short_lag=10,
                period=12)
    group = analyse(x, spec)
    for i in range(x.shape[0]):
        alone = analyse(x[i : i + 1], spec)
        assert np.array_equal(alone.acf[0], group.acf[i]) and np.array_equal(alone.pacf[0], group.pacf[i])
        for t_alone, t_group in zip(alone.tests, group.tests):
            assert np.array_equal(t_alone.statistic[0], t_group.statistic[i], equal_nan=True), t_alone.name
            assert np.array_equal(t_alone.p_value[0], t_group.p_value[i], equal_nan=True), t_alone.name
        assert np.array_equal(alone.power[0], group.power[i])
        assert alone.unit_root[0] == group.unit_root[i]


@pytest.mark.parametrize("seed", range(12))
def test_the_durbin_levinson_paths_give_the_same_bits(seed, monkeypatch):
    """Plain floats (few series) and NumPy (a reduction over the terms for several series,
    add.accumulate for one long one): each must reproduce the others exactly, or a series'
    PACF would depend on its batch."""
    rng = np.random.default_rng(seed)
    n, max_lag = int(rng.integers(12, 300)), int(rng.integers(1, 60))
    m = 1 if seed % 3 == 0 else int(rng.integers(2, 40))
    x = rng.standard_normal((m, n))
    if seed % 2:
        x = np.cumsum(x, axis=1)  # PACF near 1 at lag 1
    r = acf(x, min(max_lag, n - 1))
    results = []
    for scalar_max in (10**9, -1):
        monkeypatch.setattr(partial, "SCALAR_MAX_WORK", scalar_max)
        results.append(partial.pacf(r))
    assert np.array_equal(results[0], results[1], equal_nan=True)
    # and the rows of a group get the bits they get alone
    monkeypatch.setattr(partial, "SCALAR_MAX_WORK", -1)
    for i in range(m):
        assert np.array_equal(partial.pacf(r[i : i + 1]), results[1][i : i + 1], equal_nan=True)


def test_seasonal_strength_is_the_same_before_and_after_the_operator_is_built(monkeypatch):
    """Rent or buy: single series of one shape are fitted one by one until as many rows as the
    operator costs (n fits) have been fitted, then the operator is built and used. The reported
    strength (6 decimals) is the same either way; reference: statsmodels' STL fit of each series."""
    from statsmodels.tsa.seasonal import STL

    monkeypatch.setattr(seasonality, "_operators", type(seasonality._operators)())
    monkeypatch.setattr(seasonality, "_fitted_rows", {})
    n, period = 40, 4
    rng = np.random.default_rng(11)
    x = rng.standard_normal((n + 5, n)) + np.sin(2 * np.pi * np.arange(n) / period)
    alone = [float(seasonality.stl_strengths(row[None, :], period)[0]) for row in x]
    assert (n, period) in seasonality._operators  # built after n rows had been fitted one by one
    for row, value in zip(x, alone):
        fit = STL(row, period=period).fit()
        expected = max(0.0, 1.0 - np.var(fit.resid) / np.var(fit.seasonal + fit.resid))
        assert value == pytest.approx(expected, abs=1e-6)
    assert seasonality.stl_strengths(x, period).tolist() == alone

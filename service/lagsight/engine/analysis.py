"""One pass of the engine over a group of equal-length series that share options."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .autocorrelation import acf
from .bands import band_limits
from .masked import masked_acf, masked_bands, masked_portmanteau
from .partial import pacf
from .portmanteau import PORTMANTEAU_TESTS, portmanteau


@dataclass
class TestArrays:
    """A portmanteau test at several lags, for every series of a group."""

    name: str
    lags: list[int]
    df: np.ndarray  # (L,)
    statistic: np.ndarray  # (m, L)
    p_value: np.ndarray  # (m, L), NaN where df <= 0


@dataclass
class GroupAnalysis:
    """Arrays for m series of length n; row i belongs to the i-th series."""

    n: int
    max_lag: int
    confidence: float
    model_df: int
    acf: np.ndarray  # (m, K)
    acf_lower: np.ndarray
    acf_upper: np.ndarray
    pacf: np.ndarray  # (m, K)
    pacf_lower: np.ndarray
    pacf_upper: np.ndarray
    tests: list[TestArrays]
    n_effective: np.ndarray | None = None  # (m, K) per-lag effective sizes when values are missing (masked.py)


def analyse(
    x: np.ndarray,
    max_lag: int,
    confidence: float,
    model_df: int,
    test_lags: list[int],
    tests: tuple[str, ...] = PORTMANTEAU_TESTS,
    mask: np.ndarray | None = None,
) -> GroupAnalysis:
    """Autocorrelations, partial autocorrelations, bands and portmanteau tests.

    Parameters
    ----------
    x : ndarray, shape (m, n)
        Finite, non-constant rows, n >= 3.
    max_lag : int
        1 <= max_lag <= n - 1.
    confidence : float
        Band coverage and 1 - test level.
    model_df : int
        Fitted parameters to subtract from the portmanteau degrees of freedom.
    test_lags : list of int
        Lags at which the portmanteau tests are computed (each <= max_lag).
    tests : tuple of str
        Which portmanteau tests, from ``PORTMANTEAU_TESTS``.
    mask : ndarray of bool, shape (m, n), optional
        True where observed. When given, the amplitude-modulated estimator with
        per-lag effective sizes is used (see :mod:`.masked`); rows may hold NaN where False.
    """
    if mask is not None:
        return _analyse_masked(x, mask, max_lag, confidence, model_df, test_lags, tests)
    x = np.atleast_2d(np.asarray(x, dtype=np.float64))
    m, n = x.shape
    r = acf(x, max_lag)
    phi = pacf(r)
    lo, hi = band_limits("white_noise", n, max_lag, confidence, m)
    arrays = []
    for name in tests:
        stat, df, p = portmanteau(r, n, test_lags, model_df, name)
        arrays.append(TestArrays(name, list(test_lags), df, stat, p))
    return GroupAnalysis(n, max_lag, confidence, model_df, r, lo, hi, phi, lo.copy(), hi.copy(), arrays)


def _analyse_masked(x, mask, max_lag, confidence, model_df, test_lags, tests) -> GroupAnalysis:
    x = np.atleast_2d(np.asarray(x, dtype=np.float64))
    n = x.shape[1]
    r, n_eff = masked_acf(x, mask, max_lag)
    phi = pacf(r)
    lo, hi = masked_bands(n_eff, confidence)
    arrays = []
    for name in tests:
        stat, df, p = masked_portmanteau(r, n, n_eff, test_lags, model_df, name)
        arrays.append(TestArrays(name, list(test_lags), df, stat, p))
    return GroupAnalysis(n, max_lag, confidence, model_df, r, lo, hi, phi, lo.copy(), hi.copy(), arrays, n_eff)

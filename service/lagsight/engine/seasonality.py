"""Seasonal strength from an STL decomposition, and a suggested period when none is known.

Notes
-----
Seasonal strength [1]_ is

    F_S = max(0, 1 - Var(R_t) / Var(S_t + R_t)),

with S_t and R_t the seasonal and remainder components of an STL decomposition
[2]_ (``statsmodels.tsa.seasonal.STL``, default settings). It lies in [0, 1]:
near 0 no seasonal pattern, near 1 a seasonal pattern that dominates the noise.
The engine computes it only for series with a seasonal lag outside the band, and
reports it to 6 decimals.

The decomposition is :func:`.stl.decompose`, a vectorised implementation of the same STL
that agrees with statsmodels' to rounding. Without robustness iterations (the default)
STL is a linear map of the series: for a given length n and period the seasonal and
remainder components are S x and R x for fixed n x n matrices. When at least n series
of length n need the strength at once (and n <= OPERATOR_MAX_N), S and R are built by
decomposing the n unit vectors (cached per n and period) and applied to all the series
by one matrix product, cheaper than decomposing each series; this agrees with the direct
decomposition to rounding (about 1e-15), far below the 6 reported decimals. Series that
arrive a few at a time (single requests of a common length) are decomposed directly until
as many rows of that length and period have been decomposed as the operator costs to build
(n rows); then it is built and used from there on. This rent-or-buy rule never spends more
than twice the cheaper of the two choices made with hindsight.

References
----------
.. [1] Wang, X., Smith, K. A. et al. (2006). Characteristic-based clustering
   for time series data. Data Mining and Knowledge Discovery 13, 335-364.
.. [2] Cleveland, R. B., Cleveland, W. S., McRae, J. E. and Terpenning, I. (1990). STL: a
   seasonal-trend decomposition procedure based on loess. J. Official Statistics 6, 3-73.
"""
from __future__ import annotations

import threading
from collections import OrderedDict

import numpy as np

from lagsight.engine import stl

#: Longest series for which the linear STL operator (two n x n matrices) is built.
OPERATOR_MAX_N = 1000
#: Longest series for which rows decomposed directly count towards building the operator
#: (two matrices of at most 2 x 400 x 400 x 8 bytes = 2.5 MB per cached shape).
RENT_MAX_N = 400
DECIMALS = 6

#: Rows decomposed directly so far, per (n, period) below RENT_MAX_N (bounded: cleared when full).
_fitted_rows: dict[tuple[int, int], int] = {}
_FITTED_KEYS_MAX = 256


def _scaled(x: np.ndarray) -> np.ndarray:
    """Rows rescaled by an exact power of two (the strength is scale-free; variances cannot overflow)."""
    peak = np.max(np.abs(x), axis=-1, keepdims=True)
    return np.ldexp(x, -np.frexp(np.where(peak > 0, peak, 1.0))[1])


def _stl_operator(n: int, period: int) -> tuple[np.ndarray, np.ndarray]:
    """Matrices S, R with seasonal = x @ S and remainder = x @ R for every series x of length n."""
    eye = np.eye(n)
    seasonal, trend = stl.decompose(eye, period)  # row j: the response to the unit vector e_j
    return seasonal, eye - seasonal - trend


#: Built operators, least recently used first (at most OPERATORS_KEPT shapes per process).
_operators: OrderedDict[tuple[int, int], np.ndarray] = OrderedDict()
OPERATORS_KEPT = 8
_lock = threading.Lock()  # the two tables are shared by a worker's threads


def _operator(n: int, period: int) -> np.ndarray:
    """[S + R | R] as one n x 2n matrix, each half's columns centred: x @ it gives the
    seasonal-plus-remainder and the remainder of every row, each minus its own mean, in one
    matrix product (so their variances are plain mean squares)."""
    key = (n, period)
    if key in _operators:
        _operators.move_to_end(key)
        return _operators[key]
    seasonal, remainder = _stl_operator(n, period)
    halves = [seasonal + remainder, remainder]
    ops = _operators[key] = np.hstack([h - h.mean(axis=1, keepdims=True) for h in halves])
    while len(_operators) > OPERATORS_KEPT:
        _operators.popitem(last=False)
    return ops


def _use_operator(m: int, n: int, period: int) -> bool:
    """Use the operator for these m rows? (the rent-or-buy rule of the module notes)"""
    if n > OPERATOR_MAX_N:
        return False
    key = (n, period)
    if m >= n or key in _operators:
        return True
    if n > RENT_MAX_N:
        return False
    done = _fitted_rows.get(key, 0) + m
    if done >= n:
        _fitted_rows.pop(key, None)
        return True
    if key not in _fitted_rows and len(_fitted_rows) >= _FITTED_KEYS_MAX:
        _fitted_rows.clear()
    _fitted_rows[key] = done
    return False


def _strength(seasonal_plus_remainder: np.ndarray, remainder: np.ndarray, centred: bool = False) -> np.ndarray:
    """F_S per row; ``centred`` says both components already have mean zero per row."""
    if centred:
        total = np.vecdot(seasonal_plus_remainder, seasonal_plus_remainder)
        rest = np.vecdot(remainder, remainder)
    else:
        total, rest = np.var(seasonal_plus_remainder, axis=-1), np.var(remainder, axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        value = np.where(total > 0, 1.0 - rest / total, 0.0)
    return np.round(np.maximum(value, 0.0), DECIMALS)


def stl_strengths(x: np.ndarray, period: int) -> np.ndarray:
    """Seasonal strength F_S of each row of x (rows of length >= 2 * period + 1)."""
    x = _scaled(np.atleast_2d(np.asarray(x, dtype=np.float64)))
    m, n = x.shape
    with _lock:
        ops = _operator(n, period) if _use_operator(m, n, period) else None
    if ops is not None:
        y = x @ ops
        return _strength(y[:, :n], y[:, n:], centred=True)
    seasonal, trend = stl.decompose(x, period)
    remainder = x - seasonal - trend
    return _strength(seasonal + remainder, remainder)


def stl_strengths_many(xs: list[np.ndarray], period: int) -> list[np.ndarray]:
    """:func:`stl_strengths` of several arrays of rows of different lengths (a batch of many lengths).

    Each array takes the operator when :func:`stl_strengths` would; the others are decomposed together by
    :func:`.stl.decompose_many`, whose components agree with the direct decomposition to rounding (about
    1e-15), far below the 6 reported decimals.
    """
    out: list = [None] * len(xs)
    direct = []
    for i, x in enumerate(xs):
        m, n = x.shape
        with _lock:
            use = _use_operator(m, n, period)
        if use or len(xs) == 1:
            out[i] = stl_strengths(x, period)
        else:
            direct.append(i)
    if direct:
        scaled = [_scaled(np.asarray(xs[i], dtype=np.float64)) for i in direct]
        for i, x, (seasonal, trend) in zip(direct, scaled, stl.decompose_many(scaled, period)):
            remainder = x - seasonal - trend
            out[i] = _strength(seasonal + remainder, remainder)
    return out


def stl_strength(x: np.ndarray, period: int) -> float:
    """Seasonal strength F_S of one series (needs len(x) >= 2 * period + 1)."""
    return float(stl_strengths(x, period)[0])


def suggest_periods(r: np.ndarray, upper: np.ndarray, power: np.ndarray, n: int) -> list:
    """A candidate seasonal period for each row, or None; r, upper (m, K) and power (m, q).

    The candidate is the lag k >= 2 with the largest autocorrelation among local
    peaks that lie above the band (the first such lag on ties), kept only when the
    periodogram's largest ordinate sits at a frequency within one Fourier step of
    1/k (the two views agree). This is a suggestion, not a test (common practice,
    no source).
    """
    m, K = r.shape
    if K < 3 or power.shape[1] == 0:
        return [None] * m
    mid = r[:, 1:-1]  # lags 2..K-1 have neighbours on both sides
    peaks = (mid > r[:, :-2]) & (mid >= r[:, 2:]) & (mid > upper[:, 1:-1])
    best = np.argmax(np.where(peaks, mid, -np.inf), axis=1) + 2
    j = np.argmax(power, axis=1) + 1  # Fourier index of the largest ordinate
    keep = peaks.any(axis=1) & (np.abs(j - n / best) <= 1.0)
    return [int(b) if k else None for b, k in zip(best.tolist(), keep.tolist())]

"""STL decomposition of many series at once, vectorised over rows.

The decomposition is that of Cleveland et al. (1990) with the settings the seasonal strength
is documented with (``statsmodels.tsa.seasonal.STL(x, period=p)`` defaults): seasonal window 7,
trend window the odd integer at or above 1.5 p / (1 - 1.5 / 7), low-pass window the odd
integer above p, local-linear fits, every point fitted (jumps of 1), no robustness weights,
five inner passes. Without robustness weights every loess fit is a fixed linear combination
of the values in its window, whose coefficients depend only on the window and the point's
place in it; they are computed once per (length, window) and applied to every row with one
``np.vecdot`` call over sliding windows. A row therefore gets the same arithmetic, and the same
bits, alone or among others. The results agree with statsmodels' STL to rounding (about
1e-13 relative; tests/test_engine_reference.py), at a fraction of its cost for long series
(statsmodels fits each point in a loop: about 0.36 us per point and trend-window value).

References
----------
.. [1] Cleveland, R. B., Cleveland, W. S., McRae, J. E. and Terpenning, I. (1990). STL: a
   seasonal-trend decomposition procedure based on loess. J. Official Statistics 6, 3-73.
"""
from __future__ import annotations

import threading
from collections import OrderedDict
from functools import lru_cache

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

SEASONAL_WINDOW = 7
INNER_PASSES = 5
#: Longest trend window decomposed (periods up to 1,048): a window of w values costs w x w loess
#: coefficients (32 MB at 2,001) and about w operations per point and pass. Longer periods are not
#: decomposed; the report says so (statsmodels' loop would take minutes there).
MAX_TREND_WINDOW = 2001
#: Loess coefficient tables kept per process, least recently used first, within this many bytes.
CACHE_BYTES = 96 << 20
#: Rows of coefficients computed at a time (bounds the temporary arrays of a long window).
WEIGHT_ROWS = 256


def supports(period: int) -> bool:
    """Whether a period's trend window is within MAX_TREND_WINDOW."""
    return windows(period)[0] <= MAX_TREND_WINDOW


def windows(period: int) -> tuple[int, int]:
    """(trend, low-pass) windows for a period, as statsmodels' STL chooses them by default."""
    trend = int(np.ceil(1.5 * period / (1 - 1.5 / SEASONAL_WINDOW)))
    trend += trend % 2 == 0
    low_pass = period + 1
    low_pass += low_pass % 2 == 0
    return trend, low_pass


#: The longest period decomposed (its trend window is at most MAX_TREND_WINDOW): 1,048.
MAX_PERIOD = next(p for p in range(MAX_TREND_WINDOW, 1, -1) if windows(p)[0] <= MAX_TREND_WINDOW)


def _fit_weights(n: int, window: int, xs: np.ndarray, nleft: np.ndarray, width: int) -> tuple[np.ndarray, np.ndarray]:
    """:func:`_fit_rows` a block of WEIGHT_ROWS points at a time."""
    if xs.size <= WEIGHT_ROWS:
        return _fit_rows(n, window, xs, nleft, width)
    parts = [_fit_rows(n, window, xs[i:i + WEIGHT_ROWS], nleft[i:i + WEIGHT_ROWS], width)
             for i in range(0, xs.size, WEIGHT_ROWS)]
    return np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts])


def _fit_rows(n: int, window: int, xs: np.ndarray, nleft: np.ndarray, width: int) -> tuple[np.ndarray, np.ndarray]:
    """Local-linear loess coefficients at points ``xs`` (1-based) from the ``width`` values starting at
    ``nleft`` (1-based) of a series of length n smoothed with window ``window``.

    Returns (coefficients (P, width), undefined (P,)): undefined where every tricube weight is zero
    (the caller substitutes a value, as the original routine does).
    """
    xs = xs.astype(np.float64)
    left = nleft.astype(np.float64)
    pos = left[:, None] + np.arange(width, dtype=np.float64)[None, :]
    h = np.maximum(xs - left, left + width - 1 - xs)
    if window > n:
        h = h + (window - n) // 2
    r = np.abs(pos - xs[:, None])
    with np.errstate(divide="ignore", invalid="ignore"):
        tricube = (1.0 - (r / h[:, None]) ** 3) ** 3
    w = np.where(r <= 0.001 * h[:, None], 1.0, np.where(r <= 0.999 * h[:, None], tricube, 0.0))
    total = w.sum(axis=1)
    undefined = total <= 0
    with np.errstate(divide="ignore", invalid="ignore"):
        w = w / total[:, None]
        centre = (w * pos).sum(axis=1)
        spread = (w * (pos - centre[:, None]) ** 2).sum(axis=1)
        slope = (xs - centre) / spread
        linear = (h > 0) & (np.sqrt(spread) > 0.001 * (n - 1.0))
        w = np.where(linear[:, None], w * (slope[:, None] * (pos - centre[:, None]) + 1.0), w)
    return np.where(undefined[:, None], 0.0, w), undefined


_smoothers: OrderedDict[tuple[int, int], tuple[int, int, np.ndarray]] = OrderedDict()
_smoothers_lock = threading.Lock()


def _smoother(n: int, window: int) -> tuple[int, int, np.ndarray]:
    """:func:`_build_smoother`, kept in a least-recently-used table of at most CACHE_BYTES."""
    key = (n, window)
    with _smoothers_lock:
        if key in _smoothers:
            _smoothers.move_to_end(key)
            return _smoothers[key]
    built = _build_smoother(n, window)
    with _smoothers_lock:
        _smoothers[key] = built
        while sum(entry[2].nbytes for entry in _smoothers.values()) > CACHE_BYTES and len(_smoothers) > 1:
            _smoothers.popitem(last=False)
        if built[2].nbytes > CACHE_BYTES:
            _smoothers.pop(key, None)
    return built


def _build_smoother(n: int, window: int) -> tuple[int, int, np.ndarray]:
    """Loess coefficients of a length-n series smoothed with ``window``: (width, head, coefficients).

    When the window covers the series (window >= n), width = head = n and row p of the (n, n)
    coefficients fits point p from the whole series. Otherwise width = window and the
    (width + 1, width) coefficients hold: rows 0..head-1, the first ``head`` points from the first
    window (each at its place in it); rows head..width-1, the last points from the last window;
    row width, every middle point from the window centred on it (place head-1). As in the original
    routine, the first and last windows are fitted at their own positions.
    """
    if window >= n:
        coef, undefined = _fit_weights(n, window, np.arange(1, n + 1), np.ones(n, dtype=np.int64), n)
        width, head = n, n
    else:
        width, head = window, (window + 2) // 2
        first = np.arange(head)
        last = np.arange(head, window)
        parts = [
            _fit_weights(n, window, first + 1, np.ones(head, dtype=np.int64), window),
            _fit_weights(n, window, n - window + last + 1, np.full(last.size, n - window + 1), window),
            _fit_weights(n, window, np.array([head + 1]), np.array([2]), window),  # the window starting at 2
        ]
        coef = np.concatenate([part[0] for part in parts])
        undefined = np.concatenate([part[1] for part in parts])
    if undefined.any():  # cannot happen: a point inside its own window has weight 1
        raise AssertionError("loess weights undefined inside the window")
    coef.flags.writeable = False
    return width, head, coef


def smooth(y: np.ndarray, window: int) -> np.ndarray:
    """Loess (local linear, tricube, ``window`` nearest values) of every row of y at every point."""
    m, n = y.shape
    if n < 2:
        return y.copy()
    width, head, coef = _smoother(n, window)
    if width == n:
        return np.vecdot(y[:, None, :], coef[:n])
    view = sliding_window_view(y, width, axis=1)  # (m, n - width + 1, width), no copy
    out = np.empty((m, n))
    out[:, :head] = np.vecdot(view[:, :1, :], coef[:head])
    out[:, head:head + n - width] = np.vecdot(view[:, 1:, :], coef[width])
    out[:, head + n - width:] = np.vecdot(view[:, -1:, :], coef[head:width])
    return out


@lru_cache(maxsize=64)
def _ends(k: int) -> tuple[np.ndarray, bool, np.ndarray, bool]:
    """Coefficients extrapolating a cycle-subseries of k values one step before and after its ends."""
    width = min(SEASONAL_WINDOW, k)
    before, undefined_before = _fit_weights(k, SEASONAL_WINDOW, np.array([0]), np.array([1]), width)
    after, undefined_after = _fit_weights(k, SEASONAL_WINDOW, np.array([k + 1]),
                                          np.array([max(1, k - SEASONAL_WINDOW + 1)]), width)
    return before[0], bool(undefined_before[0]), after[0], bool(undefined_after[0])


def _cycle_subseries(y: np.ndarray, period: int) -> np.ndarray:
    """Each cycle-subseries smoothed and extended by one value at each end: shape (m, n + 2 period)."""
    m, n = y.shape
    full = -(-n // period)  # values in the longest subseries
    padded = np.zeros((m, full * period))
    padded[:, :n] = y
    sub = padded.reshape(m, full, period)  # sub[:, i, j] = y[i * period + j]
    out = np.zeros((m, full + 2, period))
    longer = n - (full - 1) * period  # subseries 0..longer-1 have `full` values, the others full - 1
    for k, cols in ((full, slice(0, longer)), (full - 1, slice(longer, period))):
        if k < 1 or cols.start >= cols.stop:
            continue
        z = np.ascontiguousarray(sub[:, :k, cols].transpose(0, 2, 1)).reshape(-1, k)  # one row per subseries
        fitted = smooth(z, SEASONAL_WINDOW) if k >= 2 else z.copy()
        before, nan_before, after, nan_after = _ends(k)
        width = before.size
        first = fitted[:, 0] if nan_before else np.vecdot(z[:, :width], before)
        last = fitted[:, -1] if nan_after else np.vecdot(z[:, k - width:], after)
        block = np.concatenate([first[:, None], fitted, last[:, None]], axis=1)  # (rows, k + 2)
        out[:, :k + 2, cols] = block.reshape(m, -1, k + 2).transpose(0, 2, 1)
    return out.reshape(m, -1)[:, : n + 2 * period]


def _moving_average(x: np.ndarray, width: int) -> np.ndarray:
    total = np.concatenate([np.zeros((x.shape[0], 1)), np.cumsum(x, axis=1)], axis=1)
    return (total[:, width:] - total[:, :-width]) / float(width)


def decompose(x: np.ndarray, period: int) -> tuple[np.ndarray, np.ndarray]:
    """Seasonal and trend components of every row of x (m, n), n >= 2 * period + 1, supports(period)."""
    if not supports(period):
        raise ValueError(f"period {period} needs a trend window above {MAX_TREND_WINDOW} values")
    x = np.atleast_2d(np.asarray(x, dtype=np.float64))
    n = x.shape[1]
    trend_window, low_pass_window = windows(period)
    trend = np.zeros_like(x)
    seasonal = trend
    for _ in range(INNER_PASSES):
        cycle = _cycle_subseries(x - trend, period)
        low = _moving_average(_moving_average(_moving_average(cycle, period), period), 3)
        low = smooth(low, low_pass_window)
        seasonal = cycle[:, period:period + n] - low
        trend = smooth(x - seasonal, trend_window)
    return seasonal, trend

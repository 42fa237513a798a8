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
from scipy import fft as sp_fft

SEASONAL_WINDOW = 7
INNER_PASSES = 5
#: Longest trend window decomposed (periods up to 1,048): a window of w values costs w x w loess
#: coefficients (32 MB at 2,001) and about w operations per point and pass. Longer periods are not
#: decomposed; the report says so (statsmodels' loop would take minutes there).
MAX_TREND_WINDOW = 2001
#: Loess coefficient tables kept per process, least recently used first, within this many bytes.
CACHE_BYTES = 96 << 20
#: Windows from FFT_MIN_WIDTH values on, with at least FFT_MIN_WORK products per row in the middle points'
#: fits (one fixed set of coefficients), apply them as a convolution by FFT: O(n log n) a row instead of
#: O(n window). It agrees with the direct sums to rounding (about 1e-15 of the series' scale). The choice
#: depends on the shape alone, never on the number of rows, so a row gets the same bits alone or among others.
#: Measured on the benchmark machine: 2.6 to 6.6 times faster for 8 rows of 1,000 values and windows of
#: 367 and 697 (the low-pass and trend windows of period 365), 0.7 to 0.9 times for one row.
FFT_MIN_WIDTH = 64
FFT_MIN_WORK = 100_000
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


def _fit_weights(n: int, window: int, place: np.ndarray, width: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`_fit_rows` a block of WEIGHT_ROWS points at a time."""
    if place.size <= WEIGHT_ROWS:
        return _fit_rows(n, window, place, width)
    parts = [_fit_rows(n, window, place[i:i + WEIGHT_ROWS], width) for i in range(0, place.size, WEIGHT_ROWS)]
    return tuple(np.concatenate([p[j] for p in parts]) for j in range(3))


def _fit_rows(n: int, window: int, place: np.ndarray, width: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Local-linear loess coefficients at points that lie at ``place`` (0-based, may lie outside) relative to
    the first of the ``width`` values they are fitted from, in a series of length n smoothed with ``window``.

    Positions are counted from the window's first value, so the coefficients of a window do not depend on
    where it lies in the series (the original routine counts from the series' start: the same fit, to
    rounding). Returns (coefficients (P, width), undefined (P,), root spread (P,)): undefined where every
    tricube weight is zero (the caller substitutes a value, as the original routine does); the fit is linear
    where the root spread of the weighted positions exceeds 0.001 (n - 1), as in the original routine.
    """
    xs = place.astype(np.float64)
    pos = np.arange(width, dtype=np.float64)[None, :]
    h = np.maximum(xs, width - 1 - xs)
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
        root = np.sqrt(spread)
        linear = (h > 0) & (root > 0.001 * (n - 1.0))
        w = np.where(linear[:, None], w * (slope[:, None] * (pos - centre[:, None]) + 1.0), w)
    return np.where(undefined[:, None], 0.0, w), undefined, np.where(h > 0, root, 0.0)


_smoothers: OrderedDict[tuple[int, int], tuple[int, int, np.ndarray, np.ndarray]] = OrderedDict()
_smoothers_lock = threading.Lock()


def _smoother(n: int, window: int) -> tuple[int, int, np.ndarray]:
    """:func:`_build_smoother`, kept in a least-recently-used table of at most CACHE_BYTES.

    A window shorter than the series has the same coefficients at every length whose threshold
    0.001 (n - 1) leaves the same fits linear: one table serves them all (key (0, window)), so a batch
    of many lengths builds one table per window, not one per length.
    """
    if window < n:
        found = _cached((0, window), lambda: _build_smoother(window + 1, window))
        if (found[3] > 0.001 * (n - 1.0)).all():  # every fit of the shared table is linear at this n too
            return found[:3]
    return _cached((n, window), lambda: _build_smoother(n, window))[:3]


def _cached(key: tuple[int, int], build) -> tuple[int, int, np.ndarray, np.ndarray]:
    with _smoothers_lock:
        if key in _smoothers:
            _smoothers.move_to_end(key)
            return _smoothers[key]
    built = build()
    with _smoothers_lock:
        _smoothers[key] = built
        while sum(entry[2].nbytes for entry in _smoothers.values()) > CACHE_BYTES and len(_smoothers) > 1:
            _smoothers.popitem(last=False)
        if built[2].nbytes > CACHE_BYTES:
            _smoothers.pop(key, None)
    return built


def _build_smoother(n: int, window: int) -> tuple[int, int, np.ndarray, np.ndarray]:
    """Loess coefficients of a length-n series smoothed with ``window``: (width, head, coefficients, root
    spreads).

    When the window covers the series (window >= n), width = head = n and row p of the (n, n)
    coefficients fits point p from the whole series. Otherwise width = window and the
    (width + 1, width) coefficients hold: rows 0..head-1, the first ``head`` points from the first
    window (each at its place in it); rows head..width-1, the last points from the last window;
    row width, every middle point from the window centred on it (place head-1). As in the original
    routine, the first and last windows are fitted at their own positions.
    """
    if window >= n:
        coef, undefined, root = _fit_weights(n, window, np.arange(n), n)
        width, head = n, n
    else:
        width, head = window, (window + 2) // 2
        places = np.concatenate([np.arange(head), np.arange(head, window), [head - 1]])
        coef, undefined, root = _fit_weights(n, window, places, window)
    if undefined.any():  # cannot happen: a point inside its own window has weight 1
        raise AssertionError("loess weights undefined inside the window")
    coef.flags.writeable = False
    return width, head, coef, root


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
    if width >= FFT_MIN_WIDTH and (n - width) * width >= FFT_MIN_WORK:
        out[:, head:head + n - width] = _middle_by_fft(y, coef[width])
    else:
        out[:, head:head + n - width] = np.vecdot(view[:, 1:, :], coef[width])
    out[:, head + n - width:] = np.vecdot(view[:, -1:, :], coef[head:width])
    return out


def _middle_by_fft(y: np.ndarray, middle: np.ndarray) -> np.ndarray:
    """sum_i y[j + i] middle[i] for j = 1..n - width: the middle points' fits, as one convolution per row.

    A circular convolution of length at least n has no wrap-around at the indices kept (width - 1 and
    above), so the transform needs no padding beyond the series.
    """
    n, width = y.shape[1], middle.size
    size = sp_fft.next_fast_len(n, real=True)
    kernel = _kernel(middle.tobytes(), size)
    return sp_fft.irfft(sp_fft.rfft(y, n=size, axis=1) * kernel, n=size, axis=1)[:, width:n]


@lru_cache(maxsize=256)
def _kernel(middle: bytes, size: int) -> np.ndarray:
    """The transform of the reversed middle coefficients at one size: a batch of many lengths has a few dozen
    sizes, and each length's smoothing would otherwise transform the same coefficients again."""
    kernel = sp_fft.rfft(np.frombuffer(middle)[::-1], n=size)
    kernel.flags.writeable = False
    return kernel


@lru_cache(maxsize=64)
def _ends(k: int) -> tuple[np.ndarray, bool, np.ndarray, bool]:
    """Coefficients extrapolating a cycle-subseries of k values one step before and after its ends."""
    width = min(SEASONAL_WINDOW, k)
    before, undefined_before, _ = _fit_weights(k, SEASONAL_WINDOW, np.array([-1]), width)
    after, undefined_after, _ = _fit_weights(k, SEASONAL_WINDOW, np.array([k - max(1, k - SEASONAL_WINDOW + 1) + 1]),
                                             width)
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
    total = np.empty((x.shape[0], x.shape[1] + 1))
    total[:, 0] = 0.0
    np.cumsum(x, axis=1, out=total[:, 1:])
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


def decompose_many(xs: list[np.ndarray], period: int) -> list[tuple[np.ndarray, np.ndarray]]:
    """:func:`decompose` of several arrays of rows (m_i, n_i), each n_i >= 2 * period + 1, at once.

    The same decomposition, step for step; what changes is how the loess fits at the ends of the series are
    applied. A window shorter than the series has one table of coefficients whatever the length
    (:func:`_smoother`), so the fits at the ends of every array that uses it are one matrix product over all
    their rows, instead of a dot product per row and point. The result agrees with :func:`decompose` to rounding
    (about 1e-15 of the series' scale; a matrix product sums in its own order), not bit for bit: it serves a
    batch of many lengths, where a few dot products per row would cost more than the rest of the
    decomposition.
    """
    if not supports(period):
        raise ValueError(f"period {period} needs a trend window above {MAX_TREND_WINDOW} values")
    xs = [np.atleast_2d(np.asarray(x, dtype=np.float64)) for x in xs]
    trend_window, low_pass_window = windows(period)
    trends = [np.zeros_like(x) for x in xs]
    seasonals = trends
    for _ in range(INNER_PASSES):
        cycles = [_cycle_subseries(x - trend, period) for x, trend in zip(xs, trends)]
        lows = smooth_many([_moving_average(_moving_average(_moving_average(c, period), period), 3) for c in cycles],
                           low_pass_window)
        seasonals = [c[:, period:period + x.shape[1]] - low for c, x, low in zip(cycles, xs, lows)]
        trends = smooth_many([x - s for x, s in zip(xs, seasonals)], trend_window)
    return list(zip(seasonals, trends))


def smooth_many(ys: list[np.ndarray], window: int) -> list[np.ndarray]:
    """:func:`smooth` of several arrays of rows; arrays that share a table get their end fits by one matrix
    product (see :func:`decompose_many`)."""
    out: list = [None] * len(ys)
    shared: dict[int, list[int]] = {}
    tables = {}
    for i, y in enumerate(ys):
        n = y.shape[1]
        table = _smoother(n, window) if n >= 2 else None
        if table is None or table[0] == n:
            out[i] = smooth(y, window)
        else:
            shared.setdefault(id(table[2]), []).append(i)
            tables[id(table[2])] = table
    for key, members in shared.items():
        width, head, coef = tables[key]
        first = np.concatenate([ys[i][:, :width] for i in members]) @ coef[:head].T
        last = np.concatenate([ys[i][:, -width:] for i in members]) @ coef[head:width].T
        start = 0
        for i in members:
            y = ys[i]
            m, n = y.shape
            res = np.empty((m, n))
            res[:, :head] = first[start:start + m]
            res[:, n - (width - head):] = last[start:start + m]
            if width >= FFT_MIN_WIDTH and (n - width) * width >= FFT_MIN_WORK:
                res[:, head:head + n - width] = _middle_by_fft(y, coef[width])
            else:
                res[:, head:head + n - width] = np.vecdot(sliding_window_view(y, width, axis=1)[:, 1:, :], coef[width])
            out[i] = res
            start += m
    return out

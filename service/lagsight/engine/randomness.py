"""Non-parametric and distributional checks, vectorised over rows.

Each function returns the statistic and its asymptotic p-value per series;
NaN marks a statistic that is undefined for that row (the report turns it into
null with a reason).

References
----------
.. [1] Wald, A. and Wolfowitz, J. (1940). On a test whether two samples are from
   the same population. Annals of Mathematical Statistics 11, 147-162 (runs).
.. [2] Brockwell, P. J. and Davis, R. A. (2016). Introduction to Time Series and
   Forecasting, 3rd ed., Springer, section 1.6 (turning point test).
.. [3] Jarque, C. M. and Bera, A. K. (1987). A test for normality of observations
   and regression residuals. International Statistical Review 55, 163-172.
.. [4] McLeod, A. I. and Li, W. K. (1983). Diagnostic checking ARMA time series
   models using squared-residual autocorrelations. J. Time Series Analysis 4, 269-273.
"""
from __future__ import annotations

import numpy as np
from scipy.special import chdtrc, ndtr

from lagsight.engine.autocorrelation import acf
from lagsight.engine.portmanteau import portmanteau


def _two_sided(z: np.ndarray) -> np.ndarray:
    return 2.0 * ndtr(-np.abs(z))


def _median(x: np.ndarray) -> np.ndarray:
    """Row medians, shape (m, 1): the mean of the two middle order statistics when n is even.

    By a full sort: NumPy's vectorised sort of short rows costs less than a selection
    (np.partition) and gives the same order statistics. Halved before adding: the same value
    as ``np.median`` (halving is exact), without its wrapper overhead, and no overflow to
    infinity for values near the float64 limit."""
    n = x.shape[1]
    h = n // 2
    ordered = np.sort(x, axis=1)
    if n % 2:
        return ordered[:, h : h + 1]
    return ordered[:, h - 1 : h] / 2.0 + ordered[:, h : h + 1] / 2.0


def runs_about_median(x: np.ndarray):
    """Wald-Wolfowitz runs test of values at or above the row median versus below.

    Values equal to the median count as above. With n1 above, n2 below and R runs,
    E[R] = 2 n1 n2 / n + 1 and Var[R] = 2 n1 n2 (2 n1 n2 - n) / (n^2 (n - 1)); z = (R - E)/sd,
    no continuity correction. Too few runs means trends or positive correlation,
    too many means alternation.

    Returns
    -------
    z, p_value, runs : ndarray (m,)
    """
    x = np.asarray(x, dtype=np.float64)
    n = x.shape[1]
    above = x >= _median(x)
    n1 = above.sum(axis=1).astype(np.float64)
    n2 = n - n1
    runs = 1.0 + (above[:, 1:] != above[:, :-1]).sum(axis=1)
    expected = 2.0 * n1 * n2 / n + 1.0
    var = 2.0 * n1 * n2 * (2.0 * n1 * n2 - n) / (n * n * (n - 1.0))
    with np.errstate(invalid="ignore", divide="ignore"):
        z = np.where(var > 0, (runs - expected) / np.sqrt(var), np.nan)
    return z, _two_sided(z), runs


def turning_points(x: np.ndarray):
    """Turning point test: T counts interior points that are a strict local peak or trough.

    Under i.i.d. continuous data E[T] = 2(n - 2)/3 and Var[T] = (16 n - 29)/90; z = (T - E)/sd.
    Too few turning points means smooth, positively correlated data; too many
    means rapid alternation.

    Returns
    -------
    z, p_value, count : ndarray (m,)
    """
    x = np.asarray(x, dtype=np.float64)
    n = x.shape[1]
    # The sign of each step, -1, 0 or +1 (for finite values the sign of a difference is the order
    # of the two values, even where the difference overflows to infinity): a strict peak or trough
    # is where two successive steps have opposite signs, that is where their product is negative.
    with np.errstate(over="ignore"):
        step = np.diff(x, axis=1)
    sign = (step > 0).view(np.int8) - (step < 0).view(np.int8)
    count = np.count_nonzero(sign[:, :-1] * sign[:, 1:] < 0, axis=1).astype(np.float64)
    z = (count - 2.0 * (n - 2) / 3.0) / np.sqrt((16.0 * n - 29.0) / 90.0)
    return z, _two_sided(z), count


def jarque_bera(d: np.ndarray, scaled: bool = False):
    """Jarque-Bera statistic n/6 (S^2 + (K - 3)^2 / 4) on centred rows; chi-square, 2 df.

    ``scaled=True`` says the rows are already bounded near 1 in magnitude (the output of
    ``autocorrelation.center``), so the exact rescaling against overflow of d**4 is skipped;
    the statistics are invariant to it, so the values are the same either way.

    Returns
    -------
    statistic, p_value, skewness, kurtosis : ndarray (m,)
    """
    n = d.shape[1]
    if not scaled:
        peak = np.max(np.abs(d), axis=1, keepdims=True)
        d = np.ldexp(d, -np.frexp(np.where(peak > 0, peak, 1.0))[1])  # exact rescaling: d**4 cannot overflow
    d2 = d * d
    m2 = d2.sum(axis=1) / n
    m3 = np.vecdot(d2, d) / n
    m4 = np.vecdot(d2, d2) / n
    skew = m3 / m2**1.5
    kurt = m4 / m2**2
    stat = n / 6.0 * (skew**2 + (kurt - 3.0) ** 2 / 4.0)
    return stat, chdtrc(2, stat), skew, kurt


def mcleod_li(d: np.ndarray, lags: list[int], scaled: bool = False):
    """McLeod-Li test: Ljung-Box on the autocorrelations of the squared centred values, df = lag.

    Rows whose squares are constant (for example +-c alternating) get NaN. ``scaled=True`` says
    the rows come from ``autocorrelation.center`` (magnitudes below 2), so their squares need no
    rescaling against overflow; the statistics are the same either way.

    Returns
    -------
    statistic, p_value : ndarray (m, len(lags))
    """
    m, n = d.shape
    sq = d * d
    constant = np.maximum.reduce(sq, axis=1) == np.minimum.reduce(sq, axis=1)
    if not constant.any():
        s, _, p = portmanteau(acf(sq, max(lags), rescale=not scaled), n, lags, 0, "ljung_box")
        return s, p
    stat = np.full((m, len(lags)), np.nan)
    p = np.full((m, len(lags)), np.nan)
    ok = ~constant
    if ok.any():
        r = acf(sq if ok.all() else sq[ok], max(lags), rescale=not scaled)
        s, _, pv = portmanteau(r, n, lags, 0, "ljung_box")
        stat[ok], p[ok] = s, pv
    return stat, p

"""Seasonal strength from an STL decomposition, and a suggested period when none is known.

Notes
-----
Seasonal strength [1]_ is

    F_S = max(0, 1 - Var(R_t) / Var(S_t + R_t)),

with S_t and R_t the seasonal and remainder components of an STL decomposition
[2]_ (``statsmodels.tsa.seasonal.STL``, default settings). It lies in [0, 1]:
near 0 no seasonal pattern, near 1 a seasonal pattern that dominates the noise.
The engine computes it only for series with a seasonal lag outside the band.

References
----------
.. [1] Wang, X., Smith, K. A. et al. (2006). Characteristic-based clustering
   for time series data. Data Mining and Knowledge Discovery 13, 335-364.
.. [2] Cleveland, R. B., Cleveland, W. S., McRae, J. E. and Terpenning, I. (1990). STL: a
   seasonal-trend decomposition procedure based on loess. J. Official Statistics 6, 3-73.
"""
from __future__ import annotations

import numpy as np
from statsmodels.tsa.seasonal import STL


def stl_strength(x: np.ndarray, period: int) -> float:
    """Seasonal strength F_S of one series (needs len(x) >= 2 * period)."""
    fit = STL(np.asarray(x, dtype=np.float64), period=period).fit()
    remainder = fit.resid
    total = np.var(fit.seasonal + remainder)
    if total <= 0:
        return 0.0
    return float(max(0.0, 1.0 - np.var(remainder) / total))


def suggest_period(r: np.ndarray, upper: np.ndarray, power: np.ndarray, n: int) -> int | None:
    """A candidate seasonal period for one series, or None.

    The candidate is the lag k >= 2 with the largest autocorrelation among local
    peaks that lie above the band, kept only when the periodogram's largest
    ordinate sits at a frequency within one Fourier step of 1/k (the two views
    agree). This is a suggestion, not a test (common practice, no source).
    """
    K = r.size
    if K < 3 or power.size == 0:
        return None
    k = np.arange(2, K)  # lags 2..K-1 have neighbours on both sides
    peaks = (r[1:-1] > r[:-2]) & (r[1:-1] >= r[2:]) & (r[1:-1] > upper[1:-1])
    if not peaks.any():
        return None
    best = int(k[peaks][np.argmax(r[1:-1][peaks])])
    j = int(np.argmax(power)) + 1  # Fourier index of the largest ordinate
    if abs(j - n / best) <= 1.0:
        return best
    return None

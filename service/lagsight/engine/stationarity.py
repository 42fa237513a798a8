"""A unit-root check that backs advice to difference: the augmented Dickey-Fuller test.

Uses ``statsmodels.tsa.stattools.adfuller`` with a constant and a fixed lag
order from Schwert's rule floor(12 (n/100)^(1/4)) [2]_ (``autolag=None``): one
regression instead of an information-criterion search over every order, which
was slow and erratic on a busy machine. A large p-value means a unit root
cannot be ruled out, which with a slowly decaying ACF supports differencing.

References
----------
.. [1] Said, S. E. and Dickey, D. A. (1984). Testing for unit roots in autoregressive-moving
   average models of unknown order. Biometrika 71, 599-607.
.. [2] Schwert, G. W. (1989). Tests for unit roots: a Monte Carlo investigation. Journal of
   Business and Economic Statistics 7, 147-159.
"""
from __future__ import annotations

import warnings

import numpy as np
from statsmodels.tsa.stattools import adfuller

#: The ACF "decays slowly" when r_1 >= this and it takes more than SLOW_HALF_LIFE lags to halve.
SLOW_R1 = 0.7
SLOW_HALF_LIFE = 6


def decays_slowly(r: np.ndarray) -> np.ndarray:
    """Per row of r (shape (m, K)): r_1 >= 0.7 and r_k stays above r_1 / 2 for lags 1..6
    (common practice, no source)."""
    r = np.atleast_2d(r)
    if r.shape[1] < SLOW_HALF_LIFE:
        return np.zeros(r.shape[0], dtype=bool)
    return (r[:, 0] >= SLOW_R1) & (r[:, :SLOW_HALF_LIFE] > r[:, :1] / 2).all(axis=1)


#: Longer series are checked on their last ADF_MAX_POINTS values (a regression on a
#: million rows would cost seconds and add nothing to the advice).
ADF_MAX_POINTS = 10_000


def adf(x: np.ndarray) -> tuple[float, float, int]:
    """ADF statistic, p-value and lags used, for one series (its last ADF_MAX_POINTS values)."""
    x = np.asarray(x, dtype=np.float64)[-ADF_MAX_POINTS:]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # statsmodels may warn on short series; the numbers stand
        lags = min(int(12 * (x.size / 100.0) ** 0.25), x.size // 2 - 2)
        stat, p, used, *_ = adfuller(x, maxlag=max(lags, 0), autolag=None)
    return float(stat), float(p), int(used)

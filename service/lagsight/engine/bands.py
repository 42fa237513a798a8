"""Significance bands for sample autocorrelations under a white-noise null.

Notes
-----
``white_noise``: for an i.i.d. series r_k is approximately N(0, 1/n), so the
band is +-z/sqrt(n) with z = Phi^{-1}((1 + confidence)/2) (1.96 at 95%) [1]_.
The same band applies to the PACF (Quenouille's result, [1]_ section 6.2).

References
----------
.. [1] Box, Jenkins, Reinsel and Ljung (2015), Time Series Analysis, 5th ed.,
   sections 2.1.6 and 6.2.
"""
from __future__ import annotations

import numpy as np
from scipy.special import ndtri

BAND_KINDS = ("white_noise",)


def normal_quantile(confidence: float) -> float:
    """Two-sided standard normal quantile z with P(|Z| <= z) = confidence.

    ``-ndtri(q)`` is what ``scipy.stats.norm.isf(q)`` computes, without the
    distribution object's per-call overhead.
    """
    return float(-ndtri((1.0 - confidence) / 2.0))


def band_limits(kind: str, n: int, max_lag: int, confidence: float, m: int = 1):
    """Lower and upper band limits per lag.

    Parameters
    ----------
    kind : {"white_noise"}
    n : int
        Series length.
    max_lag : int
    confidence : float
        Two-sided coverage, 0 < confidence < 1.
    m : int, default 1
        Number of series (rows of the result).

    Returns
    -------
    lower, upper : ndarray, shape (m, max_lag)
    """
    if kind not in BAND_KINDS:
        raise ValueError(f"kind must be one of {BAND_KINDS}, got {kind!r}")
    half = normal_quantile(confidence) / np.sqrt(n)
    upper = np.full((m, max_lag), half)
    return -upper, upper

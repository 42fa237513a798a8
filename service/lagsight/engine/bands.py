"""Significance bands for sample autocorrelations under a white-noise null.

Every band is centre_k +- z * se_k. The kinds:

``white_noise`` (default)
    centre 0, se = 1/sqrt(n), z = Phi^{-1}((1 + confidence)/2): the large-sample
    band for an i.i.d. series [1]_. It is slightly wide at moderate n because 1/n
    overstates Var(r_k); simulation at n = 200 puts about 4.4% of r_1..r_20 outside
    the 95% band instead of 5%.
``small_sample``
    centre E(r_k) = -(n - k)/(n (n - 1)), the exact null mean for a mean-corrected
    i.i.d. series, and the exact null variance for k <= n/2 [2]_, [3]_:

        Var(r_k) = (n^4 - (k+3) n^3 + 3k n^2 + 2k(k+1) n - 4k^2) / ((n+1) n^2 (n-1)^2).

    For k > n/2 that closed form no longer applies and the close approximation
    (n - k)/(n (n + 2)) is used (within about 3% of the simulated variance there).
    The variance formula is recalled from [3]_ and checked by simulation in the tests.
``bartlett``
    centre 0, se_k = sqrt((1 + 2 sum_{j<k} r_j^2)/n): Bartlett's large-lag variance
    under the hypothesis that the autocorrelations vanish beyond lag k - 1, the band
    to use when judging whether an MA(q) cut-off holds [1]_, [4]_.
``simultaneous``
    centre 0, se = 1/sqrt(n), z widened by the Sidak correction so that all K lags
    lie inside together with probability ``confidence`` under the null:
    per-lag coverage confidence^(1/K).

The PACF band is always centre 0, se = 1/sqrt(n) (Quenouille [1]_), with the
Sidak z under ``simultaneous`` and the per-lag z otherwise.

References
----------
.. [1] Box, Jenkins, Reinsel and Ljung (2015), Time Series Analysis, 5th ed., sections 2.1.6, 6.2.
.. [2] Moran, P. A. P. (1948). Some theorems on time series II: the significance of the serial
   correlation coefficient. Biometrika 35, 255-260.
.. [3] Dufour, J.-M. and Roy, R. (1985). Some robust exact results on sample autocorrelations and
   tests of randomness. Journal of Econometrics 29, 257-273.
.. [4] Bartlett, M. S. (1946). On the theoretical specification and sampling properties of
   autocorrelated time-series. JRSS Supplement 8, 27-41.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import ndtri

BAND_KINDS = ("white_noise", "small_sample", "bartlett", "simultaneous")


def normal_quantile(confidence: float) -> float:
    """Two-sided standard normal quantile z with P(|Z| <= z) = confidence.

    ``-ndtri(q)`` is what ``scipy.stats.norm.isf(q)`` computes, without the
    distribution object's per-call overhead.
    """
    return float(-ndtri((1.0 - confidence) / 2.0))


def per_lag_confidence(kind: str, confidence: float, max_lag: int) -> float:
    """Coverage of each single lag's band (Sidak-adjusted for the simultaneous band)."""
    return confidence ** (1.0 / max_lag) if kind == "simultaneous" else confidence


def null_mean(n: int, max_lag: int) -> np.ndarray:
    """Exact null mean of r_1..r_K for a mean-corrected i.i.d. series: -(n - k)/(n (n - 1))."""
    k = np.arange(1, max_lag + 1)
    return -(n - k) / (n * (n - 1.0))


def null_variance(n: int, max_lag: int) -> np.ndarray:
    """Null variance of r_1..r_K: exact for k <= n/2, (n - k)/(n (n + 2)) beyond."""
    k = np.arange(1, max_lag + 1, dtype=np.float64)
    n = float(n)
    exact = (n**4 - (k + 3) * n**3 + 3 * k * n**2 + 2 * k * (k + 1) * n - 4 * k**2) / (
        (n + 1) * n**2 * (n - 1) ** 2
    )
    approx = (n - k) / (n * (n + 2))
    return np.where(k <= n / 2, exact, approx)


@dataclass
class Band:
    """centre +- z * se per series and lag."""

    kind: str
    z: float
    centre: np.ndarray  # (m, K)
    se: np.ndarray  # (m, K)

    @property
    def lower(self) -> np.ndarray:
        return self.centre - self.z * self.se

    @property
    def upper(self) -> np.ndarray:
        return self.centre + self.z * self.se


def acf_band(kind: str, r: np.ndarray, n: int, confidence: float) -> Band:
    """The ACF band of the given kind for autocorrelations r (m, K)."""
    if kind not in BAND_KINDS:
        raise ValueError(f"kind must be one of {BAND_KINDS}, got {kind!r}")
    m, K = r.shape
    z = normal_quantile(per_lag_confidence(kind, confidence, K))
    centre = np.zeros((m, K))
    if kind == "small_sample":
        centre[:] = null_mean(n, K)
        se = np.broadcast_to(np.sqrt(null_variance(n, K)), (m, K)).copy()
    elif kind == "bartlett":
        previous = np.concatenate([np.zeros((m, 1)), np.cumsum(r[:, :-1] ** 2, axis=1)], axis=1)
        se = np.sqrt((1.0 + 2.0 * previous) / n)
    else:
        se = np.full((m, K), 1.0 / np.sqrt(n))
    return Band(kind, z, centre, se)


def pacf_band(kind: str, m: int, n: int, max_lag: int, confidence: float) -> Band:
    """The PACF band: 0 +- z/sqrt(n), z Sidak-adjusted under the simultaneous kind."""
    z = normal_quantile(per_lag_confidence("simultaneous" if kind == "simultaneous" else "white_noise",
                                           confidence, max_lag))
    return Band(kind, z, np.zeros((m, max_lag)), np.full((m, max_lag), 1.0 / np.sqrt(n)))

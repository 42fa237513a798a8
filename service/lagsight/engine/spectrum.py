"""Periodogram and Bartlett's cumulative periodogram test of white noise.

Notes
-----
At the Fourier frequencies f_j = j / n, j = 1..q with q = floor((n - 1) / 2)
(zero and the Nyquist frequency left out), the periodogram of a centred series is

    I(f_j) = |sum_t d_t exp(-2 pi i f_j t)|^2 / n.

For Gaussian white noise the I(f_j) are i.i.d. exponential, so the normalised
cumulative sums C_j = sum_{i<=j} I(f_i) / sum_{i<=q} I(f_i), j = 1..q-1, are
distributed as the order statistics of q - 1 independent uniforms [1]_, [2]_.
Bartlett's test compares them with the uniform distribution by the
Kolmogorov-Smirnov statistic

    D = max_j max(C_j - (j - 1)/(q - 1), j/(q - 1) - C_j),

with the p-value of the one-sample KS distribution on m = q - 1 points: exact
(``scipy.stats.kstwo``) for m <= 16; for 16 < m <= 1000 the exact survival
function tabulated per m on 239 points (computed once and shipped with the
package, :mod:`.ks_table`) and interpolated in log scale (monotone cubic; relative
error about 1e-5, checked against ``kstwo`` in the tests); for m > 1000, where the exact computation takes seconds, Stephens'
approximation [3]_ P(K > (sqrt(m) + 0.12 + 0.11/sqrt(m)) D) with K the
limiting Kolmogorov distribution (absolute error below 0.005 there). The chart
band around the line j/q is +-D_crit, D_crit the upper 1 - confidence quantile.
White noise has a flat spectrum, so its cumulative periodogram stays near the diagonal.

References
----------
.. [1] Bartlett, M. S. (1955). An Introduction to Stochastic Processes. Cambridge
   University Press, section 9.2.
.. [3] Stephens, M. A. (1970). Use of the Kolmogorov-Smirnov, Cramer-von Mises and related
   statistics without extensive tables. JRSS B 32, 115-122.
.. [2] Durbin, J. (1969). Tests for serial correlation in regression analysis
   based on the periodogram of least-squares residuals. Biometrika 56(1), 1-15.
"""
from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy import fft as sp_fft
from scipy.interpolate import PchipInterpolator
from scipy.optimize import brentq
from scipy.stats import kstwo, kstwobign

from lagsight.engine import ks_table
from lagsight.engine.ks_table import EXACT_MAX_POINTS, TABLE_MAX_POINTS

#: Charts get at most this many periodogram points; longer spectra are averaged in equal blocks.
CHART_POINTS = 512


def periodogram(d: np.ndarray) -> np.ndarray:
    """Periodogram I(f_j), j = 1..q, of centred rows; shape (m, q)."""
    n = d.shape[1]
    q = (n - 1) // 2
    spectrum = sp_fft.rfft(d, axis=1)[:, 1 : q + 1]
    return (spectrum.real**2 + spectrum.imag**2) / n


def cumulative_periodogram(power: np.ndarray) -> np.ndarray:
    """Normalised cumulative periodogram C_j, j = 1..q (the last is 1); shape (m, q)."""
    c = np.cumsum(power, axis=1)
    total = c[:, -1:].copy()
    if (total > 0).all():
        c /= total  # in place: the usual case, every row with some power
        return c
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(total > 0, c / total, np.nan)


def ks_statistic(cumulative: np.ndarray) -> np.ndarray:
    """Kolmogorov-Smirnov distance of C_1..C_{q-1} from the uniform; shape (m,). NaN when q < 2."""
    m, q = cumulative.shape
    if q < 2:
        return np.full(m, np.nan)
    c = cumulative[:, :-1]
    k = q - 1
    j = np.arange(1, k + 1)
    upper = j / k - c
    lower = c - (j - 1) / k
    return np.maximum(upper.max(axis=1), lower.max(axis=1))


def _stephens(m: int) -> float:
    return np.sqrt(m) + 0.12 + 0.11 / np.sqrt(m)


@lru_cache(maxsize=256)
def _ks_table(m: int) -> tuple[float, PchipInterpolator]:
    """log P(D_m > d) interpolated over d in [1/(2m), 1] from the 239 exact values shipped for m
    (:mod:`.ks_table`; computing them here would cost 20 to 100 ms per m)."""
    points = ks_table.grid(m)
    return points[0], PchipInterpolator(points, ks_table.log_sf(m))


def ks_p_value(statistic: np.ndarray, q: int) -> np.ndarray:
    """P-value of the KS statistic on m = q - 1 points (see the module notes for the method by m)."""
    statistic = np.asarray(statistic, dtype=np.float64)
    m = q - 1
    if m < 1:
        return np.full(statistic.shape, np.nan)
    if m <= EXACT_MAX_POINTS:
        return kstwo.sf(statistic, m)
    if m <= TABLE_MAX_POINTS:
        lo, log_sf = _ks_table(m)
        inside = np.clip(statistic, lo, 1.0)
        p = np.exp(log_sf(inside))
        return np.where(statistic <= lo, 1.0, np.where(statistic >= 1.0, 0.0, np.minimum(p, 1.0)))
    return kstwobign.sf(_stephens(m) * statistic)


@lru_cache(maxsize=256)
def ks_critical(q: int, confidence: float) -> float | None:
    """Half-width of the cumulative periodogram band at the given coverage: the d with
    P(D_m > d) = 1 - confidence, exact up to 16 points, by a root search on the tabulated
    survival function up to 1000 (``kstwo.isf`` costs about 5 ms per m there), and by
    Stephens' approximation beyond."""
    m = q - 1
    if m < 1:
        return None
    if m <= EXACT_MAX_POINTS:
        return float(kstwo.isf(1.0 - confidence, m))
    if m <= TABLE_MAX_POINTS:
        lo, log_sf = _ks_table(m)
        target = np.log(1.0 - confidence)  # log_sf falls from 0 at lo to about -690 at 1: one crossing
        return float(brentq(lambda d: float(log_sf(d)) - target, lo, 1.0, xtol=1e-14, rtol=1e-13))
    return float(kstwobign.isf(1.0 - confidence) / _stephens(m))


def chart_blocks(power: np.ndarray, n: int, limit: int = CHART_POINTS, cumulative: np.ndarray | None = None):
    """Frequencies, power and cumulative values for charts, averaged in blocks when q > limit.

    ``cumulative`` is :func:`cumulative_periodogram` of ``power`` when the caller has it already.

    Returns
    -------
    frequencies : ndarray (p,)
        Block-centre frequencies in cycles per observation.
    power : ndarray (m, p)
        Mean periodogram within each block.
    cumulative : ndarray (m, p)
        Normalised cumulative periodogram at each block's last frequency.
    expected : ndarray (p,)
        The white-noise line j / q at each block's last frequency.
    """
    m, q = power.shape
    freqs = np.arange(1, q + 1) / n
    cum = cumulative_periodogram(power) if cumulative is None else cumulative
    if q <= limit:
        return freqs, power, cum, np.arange(1, q + 1) / q
    edges = np.linspace(0, q, limit + 1).astype(int)
    sums = np.add.reduceat(power, edges[:-1], axis=1)
    counts = np.diff(edges)
    return (np.add.reduceat(freqs, edges[:-1]) / counts, sums / counts, cum[:, edges[1:] - 1], edges[1:] / q)

"""Does a candidate driver still move with the series? Prewhitened cross-correlation and Haugh's test.

Prewhitening (the Box-Jenkins procedure for identifying a transfer function [1]_): an AR(p) model
with a constant is fitted to the driver x by conditional least squares (statsmodels' ``AutoReg``),
p chosen by AIC from 0 to ``max_order`` (statsmodels' ``ar_select_order``, every order compared on the same
sample). Its residuals alpha_t are white; the same filter applied to the centred series gives
beta_t = (y_t - mean y) - sum_j phi_j (y_{t-j} - mean y). The sample cross-correlation

    r(k) = sum_t (alpha_{t-k} - mean alpha)(beta_t - mean beta) / (n' s_alpha s_beta),  k = -K..K,

(n' = n - p, the biased form) is, for k >= 0, the correlation of the series with the driver k steps
earlier: the driver leads. Negative k pairs the series with later driver values: the series leads (a
feedback from the series to the driver). Because alpha is white, each r(k) of an unrelated driver has
variance about 1/n' whatever the autocorrelation of y (Bartlett's formula with one white series [1]_),
so the band +- z / sqrt(n') applies; without prewhitening two unrelated autocorrelated series show
large spurious cross-correlations.

Haugh's test [2]_: each series is reduced to white residuals by its own AR model (order by AIC as
above), u for the series and v for the driver, on their common span of N values, and

    S* = N^2 sum_{k=-K..K} r_uv(k)^2 / (N - |k|)

is compared with chi-square on 2K + 1 degrees of freedom under independence (the modified form of
the statistic n sum r^2, for small samples; the formula is recalled from [2]_).

The driver is judged to move with the series when Haugh's test or the largest standardised
cross-correlation (Sidak over the 2K + 1 lags) rejects at alpha / 2 (Bonferroni over the two). The
lags reported are those outside the per-lag band.

References
----------
.. [1] Box, Jenkins, Reinsel and Ljung (2015), Time Series Analysis, 5th ed., chapter 12.
.. [2] Haugh, L. D. (1976). Checking the independence of two covariance-stationary time series: a
   univariate residual cross-correlation approach. Journal of the American Statistical Association
   71, 378-385.
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from scipy.special import chdtrc, ndtri
from statsmodels.tsa.ar_model import AutoReg, ar_select_order


@dataclass
class ArFit:
    order: int
    coefficients: np.ndarray  # phi_1..phi_p
    residuals: np.ndarray  # from t = p on (length n - p)


def ar_by_aic(x: np.ndarray, max_order: int) -> ArFit:
    """The AR(p) model with a constant, p in 0..max_order by AIC (statsmodels ar_select_order, AutoReg)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # statsmodels' notices on frequency-less data; the numbers stand
        selected = ar_select_order(x, max_order, ic="aic", trend="c")
        order = max(selected.ar_lags) if selected.ar_lags else 0
        if order == 0:
            return ArFit(0, np.zeros(0), x - x.mean())
        res = AutoReg(x, lags=order, trend="c").fit()
    return ArFit(order, np.asarray(res.params[1:], dtype=np.float64), np.asarray(res.resid, dtype=np.float64))


def ar_filter(y: np.ndarray, phi: np.ndarray) -> np.ndarray:
    """phi(B) applied to the centred y: (y_t - m) - sum_j phi_j (y_{t-j} - m), for t = p .. n-1."""
    d = y - y.mean()
    p = phi.size
    out = d[p:].copy()
    for j in range(1, p + 1):
        out -= phi[j - 1] * d[p - j: d.size - j]
    return out


def cross_correlation(a: np.ndarray, b: np.ndarray, max_lag: int) -> np.ndarray:
    """r(k) for k = -max_lag..max_lag: corr of b_t with a_{t-k} (a leads b for k > 0), biased form."""
    a = a - a.mean()
    b = b - b.mean()
    n = a.size
    scale = math.sqrt(float(a @ a) * float(b @ b))
    out = np.empty(2 * max_lag + 1)
    for k in range(-max_lag, max_lag + 1):
        out[k + max_lag] = float(a[: n - k] @ b[k:]) / scale if k >= 0 else float(a[-k:] @ b[: n + k]) / scale
    return out


def haugh(u: np.ndarray, v: np.ndarray, max_lag: int) -> tuple[float, int, float]:
    """Haugh's modified statistic S*, its degrees of freedom 2K + 1 and p-value, for equal-length u, v."""
    n = u.size
    r = cross_correlation(v, u, max_lag)
    k = np.abs(np.arange(-max_lag, max_lag + 1))
    stat = float(n * n * np.sum(r * r / (n - k)))
    df = 2 * max_lag + 1
    return stat, df, float(chdtrc(df, stat))


def sidak_z(level: float, count: int) -> float:
    """The z that the largest of ``count`` independent |N(0,1)| exceeds with probability ``level``
    (the per-lag tail 1 - (1 - level)^(1/count), computed without rounding it to 0 for tiny levels)."""
    tail = -math.expm1(math.log1p(-level) / count)
    return float(-ndtri(tail / 2.0))


def sidak_p(z: float, count: int) -> float:
    """P(the largest of ``count`` independent |N(0,1)| exceeds z)."""
    tail = math.erfc(z / math.sqrt(2.0))
    return -math.expm1(count * math.log1p(-tail)) if tail < 1.0 else 1.0


@dataclass
class DriverCheck:
    driver_ar: ArFit
    series_ar: ArFit
    lags: np.ndarray  # -K..K
    ccf: np.ndarray  # prewhitened cross-correlation
    n_used: int  # n - p, values in the prewhitened pair
    haugh_statistic: float
    haugh_df: int
    haugh_p: float
    haugh_n: int
    largest_lag: int
    largest_p: float  # Sidak over the 2K + 1 lags


def check(y: np.ndarray, x: np.ndarray, max_lag: int, max_order: int) -> DriverCheck:
    """Prewhiten with the driver's AR model, cross-correlate, and run Haugh's test (see the module notes)."""
    driver = ar_by_aic(x, max_order)
    alpha = driver.residuals
    beta = ar_filter(y, driver.coefficients)
    r = cross_correlation(alpha, beta, max_lag)
    n_used = alpha.size
    series = ar_by_aic(y, max_order)
    start = max(driver.order, series.order)
    u = series.residuals[start - series.order:]
    v = driver.residuals[start - driver.order:]
    stat, df, p = haugh(u, v, max_lag)
    lags = np.arange(-max_lag, max_lag + 1)
    best = int(np.argmax(np.abs(r)))
    largest_p = sidak_p(abs(float(r[best])) * math.sqrt(n_used), lags.size)
    return DriverCheck(driver, series, lags, r, n_used, stat, df, p, u.size, int(lags[best]), largest_p)

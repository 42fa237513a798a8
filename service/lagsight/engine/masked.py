"""Autocorrelation, bands and portmanteau tests for series with missing observations.

Notes
-----
With a 0/1 mask a_t (1 = observed), the observed mean xbar and d_t = a_t (x_t - xbar),
the amplitude-modulated estimator [1]_, [2]_ forms each lag from the complete pairs only:

    S_k = sum_t d_t d_{t+k},    N_k = sum_t a_t a_{t+k}    (pairs observed at lag k),
    c_k = ((n - k) / n) * S_k / N_k,    r_k = c_k / c_0,

where n is the length of the time grid. S_k / N_k is Parzen's estimator (statsmodels
``acovf(missing="conservative", adjusted=True)``); the factor (n - k)/n gives it the
same taper as the complete-data estimator, so with nothing missing c_k is exactly the
usual biased autocovariance and r_k the usual ACF.

Under white noise only N_k products enter lag k, so Var(S_k / N_k) = sigma^4 / N_k and
each lag has its own effective sample size

    n_k = n * N_k / (n - k)        (n times the share of lag-k pairs observed; n_k = n when complete).

The band at lag k is +-z / sqrt(n_k), Box-Pierce is sum n_k r_k^2 and Ljung-Box is
sum n_k (n + 2) r_k^2 / (n - k); both reduce to the usual statistics when nothing is
missing, and are compared with chi-square on h - model_df degrees of freedom [2]_.
The estimate need not be positive semi-definite, so the PACF from it is clipped to [-1, 1].

References
----------
.. [1] Parzen, E. (1963). On spectral analysis with missing observations and amplitude
   modulation. Sankhya A 25, 383-392.
.. [2] Dunsmuir, W. and Robinson, P. M. (1981). Asymptotic theory for time series
   containing missing and amplitude modulated observations. Sankhya A 43, 260-281.
"""
from __future__ import annotations

import numpy as np
from scipy.stats import chi2

from lagsight.engine.autocorrelation import autocovariance
from lagsight.engine.bands import normal_quantile


def center_observed(x: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """Rows rescaled by an exact power of two, centred on the observed mean, zero where missing."""
    a = mask.astype(np.float64)
    xo = np.where(mask, x, 0.0)
    peak = np.max(np.abs(xo), axis=1, keepdims=True)
    _, exponent = np.frexp(np.where(peak > 0, peak, 1.0))
    xo = np.ldexp(xo, -exponent)
    count = a.sum(axis=1, keepdims=True)
    d = (xo - xo.sum(axis=1, keepdims=True) / count) * a
    d -= (d.sum(axis=1, keepdims=True) / count) * a  # second pass removes the first one's rounding
    return d


def pair_counts(mask: np.ndarray, max_lag: int) -> np.ndarray:
    """N_k, the number of t with both a_t and a_{t+k} observed, for k = 0..max_lag; shape (m, max_lag + 1)."""
    a = np.atleast_2d(mask).astype(np.float64)
    return np.rint(autocovariance(a, max_lag) * a.shape[1]).astype(np.int64)


def masked_acf(x: np.ndarray, mask: np.ndarray, max_lag: int):
    """Amplitude-modulated autocorrelations and per-lag effective sample sizes.

    Parameters
    ----------
    x : ndarray, shape (m, n)
        Values; entries where ``mask`` is False are ignored (may be NaN).
    mask : ndarray of bool, shape (m, n)
        True where observed. Every row needs N_k >= 1 for k <= max_lag and a non-constant observed part.
    max_lag : int
        1 <= max_lag <= n - 1.

    Returns
    -------
    r : ndarray, shape (m, max_lag)
        r_1..r_max_lag.
    n_eff : ndarray, shape (m, max_lag)
        n_k = n N_k / (n - k).
    """
    x = np.atleast_2d(np.asarray(x, dtype=np.float64))
    mask = np.atleast_2d(np.asarray(mask, dtype=bool))
    n = x.shape[1]
    d = center_observed(x, mask)
    s = autocovariance(d, max_lag) * n
    pairs = pair_counts(mask, max_lag).astype(np.float64)
    k = np.arange(max_lag + 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        c = (n - k) / n * s / pairs
    r = c[:, 1:] / c[:, :1]
    n_eff = n * pairs[:, 1:] / (n - k[1:])
    return r, n_eff


def masked_bands(n_eff: np.ndarray, confidence: float):
    """Lower and upper white-noise band limits +-z / sqrt(n_k), shape like ``n_eff``."""
    half = normal_quantile(confidence) / np.sqrt(n_eff)
    return -half, half


def masked_portmanteau(r: np.ndarray, n: int, n_eff: np.ndarray, lags, model_df: int = 0, kind: str = "ljung_box"):
    """Portmanteau tests with per-lag effective sizes; same returns as :func:`portmanteau.portmanteau`.

    Ljung-Box: sum_{k<=h} n_k (n + 2) r_k^2 / (n - k); Box-Pierce: sum_{k<=h} n_k r_k^2.
    """
    idx = np.asarray(lags, dtype=np.intp) - 1
    k = np.arange(1, r.shape[1] + 1)
    if kind == "ljung_box":
        terms = n_eff * (n + 2.0) * r**2 / (n - k)
    elif kind == "box_pierce":
        terms = n_eff * r**2
    else:
        raise ValueError(f"unknown portmanteau test {kind!r}")
    statistic = np.cumsum(terms, axis=1)[:, idx]
    df = idx + 1 - int(model_df)
    p_value = np.full(statistic.shape, np.nan)
    ok = df > 0
    if ok.any():
        p_value[:, ok] = chi2.sf(statistic[:, ok], df[ok])
    return statistic, df, p_value

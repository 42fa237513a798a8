"""Portmanteau tests of joint autocorrelation: Ljung-Box and Box-Pierce.

Notes
-----
For lags h,

    Box-Pierce  Q_BP(h) = n * sum_{k=1}^{h} r_k^2                      [1]_
    Ljung-Box   Q_LB(h) = n (n + 2) * sum_{k=1}^{h} r_k^2 / (n - k)      [2]_

each compared with a chi-square distribution on h - model_df degrees of
freedom, where model_df counts the fitted ARMA parameters (p + q) when the
series is a model's residuals [2]_. P-values come from the survival function
(``scipy.stats.chi2.sf``, called as its ufunc ``scipy.special.chdtrc``, which
returns the same values without the per-call overhead of the distribution
object), never ``1 - cdf``. Where h - model_df <= 0 the
statistic is returned but the degrees of freedom and p-value are not defined.

References
----------
.. [1] Box, G. E. P. and Pierce, D. A. (1970). Distribution of residual
   autocorrelations in autoregressive-integrated moving average time series
   models. JASA 65, 1509-1526.
.. [2] Ljung, G. M. and Box, G. E. P. (1978). On a measure of lack of fit in
   time series models. Biometrika 65(2), 297-303.
"""
from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy.special import chdtrc

PORTMANTEAU_TESTS = ("ljung_box", "box_pierce")


def portmanteau(r: np.ndarray, n: int, lags, model_df: int = 0, kind: str = "ljung_box"):
    """Portmanteau statistics, degrees of freedom and p-values at chosen lags.

    Parameters
    ----------
    r : ndarray, shape (m, K)
        Autocorrelations r_1..r_K.
    n : int
        Series length (K < n).
    lags : sequence of int
        Lags h to test, each 1 <= h <= K.
    model_df : int, default 0
        Fitted model parameters subtracted from the degrees of freedom.
    kind : {"ljung_box", "box_pierce"}

    Returns
    -------
    statistic : ndarray, shape (m, len(lags))
    df : ndarray of int, shape (len(lags),)
        ``h - model_df``; zero or negative where not computable.
    p_value : ndarray, shape (m, len(lags))
        NaN where ``df <= 0`` (callers report these as not computable).
    """
    if kind not in PORTMANTEAU_TESTS:
        raise ValueError(f"kind must be one of {PORTMANTEAU_TESTS}, got {kind!r}")
    r = np.asarray(r, dtype=np.float64)
    lags = tuple(int(h) for h in lags)
    weights = _weights(n, lags, kind)  # (L, h_max)
    squares = r[:, : weights.shape[1]] ** 2
    # One weighted sum per tested lag: sum_k w_k r_k^2 over k <= h, w_k zero beyond h (np.vecdot
    # is a ufunc, so a row gets the same bits alone or among others).
    statistic = np.vecdot(squares[:, None, :], weights)
    df = np.asarray(lags, dtype=np.intp) - int(model_df)
    ok = df > 0
    if ok.all():
        return statistic, df, chdtrc(df, statistic)  # = chi2.sf(statistic, df)
    p_value = np.full(statistic.shape, np.nan)
    if ok.any():
        p_value[:, ok] = chdtrc(df[ok], statistic[:, ok])
    return statistic, df, p_value


@lru_cache(maxsize=256)
def _weights(n: int, lags: tuple[int, ...], kind: str) -> np.ndarray:
    """Row l holds the weight of r_k^2 in the statistic at lag lags[l], k = 1..max(lags)."""
    k = np.arange(1, max(lags) + 1)
    per_lag = n * (n + 2.0) / (n - k) if kind == "ljung_box" else np.full(k.shape, float(n))
    weights = np.where(k[None, :] <= np.asarray(lags)[:, None], per_lag[None, :], 0.0)
    weights.flags.writeable = False
    return weights

"""Autocorrelation checks for h-step-ahead forecast errors: structure beyond lag h - 1 only.

The error of an optimal h-step forecast is a moving average of the next h shocks, an MA(h - 1) process, so it is
autocorrelated at lags 1..h - 1 by construction and uncorrelated beyond. These functions test the lags k >= h and
leave lags 1..h - 1 untested.

Variance of r_k for k >= h
    Bartlett's formula under the hypothesis that the autocorrelations vanish beyond lag h - 1 [1]_, [2]_:

        var r_k = (1 + 2 sum_{j<h} rho_j^2) / n,   k >= h,

    with rho_j estimated by r_j (j = 1..h - 1); :func:`bartlett_factor` gives B = 1 + 2 sum_{j<h} r_j^2, the factor
    on the white-noise variance. The same formula is the ``bartlett`` band's variance at lag h.

Correlation between lags
    Beyond lag h - 1 the autocorrelations are still correlated with each other: Bartlett's large-lag approximation
    [1]_ gives cov(r_k, r_{k+s}) = (1/n) sum_v rho_v rho_{v+s} (v over -(h-1)..h-1), so after division by B the
    standardised values z_k have correlation c_s = sum_v rho_v rho_{v+s} / B, zero for s > 2 (h - 1)
    (:func:`lag_correlation`).

Sums from lag h on
    A portmanteau sum Q = sum_{k=h..L} z_k^2 of correlated standard normals is not chi-square. Its distribution is
    approximated by a chi-square scaled to the same mean and variance, Q ~ a chi2(b) with a = tr(C^2) / tr(C) and
    b = tr(C)^2 / tr(C^2), C the correlation matrix of z_h..z_L: the approximation of Box (1954) [3]_ (after
    Satterthwaite). With h = 1 it is the usual chi-square on L degrees of freedom. A fitted model's parameters
    are subtracted from b as from the usual degrees of freedom (model_df; see :func:`sum_p_values`).

Not rejecting is no proof of white noise, and the approximations are rough for short series; the verdict refers
the smallest p-value to a simulated null (``whiteness``), which corrects much of that.

References
----------
.. [1] Box, G. E. P., Jenkins, G. M., Reinsel, G. C. and Ljung, G. M. (2015). Time Series Analysis: Forecasting
   and Control, 5th ed., Wiley, section 2.1.6 (Bartlett's approximations for large lags; equation numbers recalled
   from memory, not checked here).
.. [2] Bartlett, M. S. (1946). On the theoretical specification and sampling properties of autocorrelated
   time-series. Journal of the Royal Statistical Society Supplement 8, 27-41.
.. [3] Box, G. E. P. (1954). Some theorems on quadratic forms applied in the study of analysis of variance
   problems, I. Annals of Mathematical Statistics 25, 290-302.
"""
from __future__ import annotations

import numpy as np
from scipy.special import chdtrc


def bartlett_factor(r: np.ndarray, horizon: int) -> np.ndarray:
    """B = 1 + 2 sum_{j<h} r_j^2 per row (m,): var r_k = B / n for k >= h when the autocorrelations vanish there.

    ``r`` holds r_1..r_K (m, K), K >= h - 1. With h = 1, B = 1.
    """
    r = np.atleast_2d(np.asarray(r, dtype=np.float64))
    head = np.nan_to_num(r[:, : horizon - 1])
    return 1.0 + 2.0 * (head * head).sum(axis=1)


def lag_correlation(r: np.ndarray, horizon: int) -> np.ndarray:
    """Correlations c_s (s = 0..2(h-1)) between z_k and z_{k+s} for k >= h, per row: shape (m, 2h - 1), c_0 = 1.

    c_s = sum_{v=-(h-1)}^{h-1} rho_v rho_{v+s} / B, rho_0 = 1, rho_{-v} = rho_v = r_v for v < h, zero beyond.
    """
    r = np.atleast_2d(np.asarray(r, dtype=np.float64))
    q = horizon - 1
    m = r.shape[0]
    rho = np.ones((m, 2 * q + 1))  # rho_{-q}..rho_q
    head = np.nan_to_num(r[:, :q])
    rho[:, q + 1:] = head
    rho[:, :q] = head[:, ::-1]
    out = np.empty((m, 2 * q + 1))
    for s in range(2 * q + 1):
        out[:, s] = (rho[:, : rho.shape[1] - s] * rho[:, s:]).sum(axis=1)
    return out / out[:, :1]


def sum_scale(c: np.ndarray, count: int) -> tuple[np.ndarray, np.ndarray]:
    """Scale a and degrees of freedom b with sum_{count lags} z_k^2 ~ a chi2(b) (Box 1954), per row.

    ``c`` from :func:`lag_correlation`; C is the count x count Toeplitz matrix of c, tr C = count and
    tr C^2 = count + 2 sum_{s>=1} (count - s) c_s^2.
    """
    s = np.arange(1, min(count, c.shape[1]))
    trace2 = count + 2.0 * ((count - s) * c[:, s] ** 2).sum(axis=1)
    return trace2 / count, count * count / trace2


def sum_p_values(z: np.ndarray, c: np.ndarray, horizon: int, lags, model_df: int = 0) -> np.ndarray:
    """p-values of the sums Q_L = sum_{k=h..L} z_k^2 at each L in ``lags`` (m, len(lags)); NaN where b - model_df
    <= 0.

    ``z`` (m, K) holds standardised autocorrelations with variance one at lags k >= h (``z[:, k - 1]``).
    p = P(chi2(b - model_df) > Q / a): the usual Box-Pierce subtraction of a fitted model's parameters, carried
    over to the approximating chi-square (common practice for one-step residuals; for h-step errors no published
    result is relied on here, and with h = 1 it is exactly the usual test).
    """
    cum = np.cumsum(z[:, horizon - 1:] ** 2, axis=1)
    out = np.full((z.shape[0], len(lags)), np.nan)
    for j, lag in enumerate(lags):
        count = int(lag) - horizon + 1
        if count < 1:
            continue
        a, b = sum_scale(c, count)
        df = b - model_df
        with np.errstate(invalid="ignore", divide="ignore"):
            out[:, j] = np.where(df > 0, chdtrc(np.maximum(df, 1e-12), cum[:, count - 1] / a), np.nan)
    return out


def portmanteau_from(r: np.ndarray, n: int | np.ndarray, lags, horizon: int, model_df: int = 0,
                     kind: str = "ljung_box") -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Ljung-Box or Box-Pierce statistics summed from lag h, with Bartlett's variance, at each lag L of ``lags``.

    Q_L = sum_{k=h..L} w_k r_k^2 / B with w_k = n (n + 2) / (n - k) (Ljung-Box) or n (Box-Pierce), B from
    :func:`bartlett_factor`; ``n`` may be an (m, K) array of effective sizes (missing values), then w_k uses it.
    Returns the statistic (m, L), the lags summed minus model_df (L,) and the p-values of :func:`sum_p_values`.
    With h = 1 these are the usual tests.
    """
    r = np.atleast_2d(np.asarray(r, dtype=np.float64))
    K = r.shape[1]
    k = np.arange(1, K + 1)
    n_arr = np.broadcast_to(np.asarray(n, dtype=np.float64), r.shape) if np.ndim(n) else None
    if n_arr is None:
        w = n * (n + 2.0) / (n - k) if kind == "ljung_box" else np.full(K, float(n))
        w = np.broadcast_to(w, r.shape)
    else:
        w = n_arr * (n_arr + 2.0) / np.maximum(n_arr - k, 1.0) if kind == "ljung_box" else n_arr
    b = bartlett_factor(r, horizon)[:, None]
    z2 = w * r * r / b
    z2[:, : horizon - 1] = 0.0
    cum = np.cumsum(z2, axis=1)
    idx = np.asarray(lags, dtype=np.intp) - 1
    statistic = cum[:, idx]
    df = idx + 1 - (horizon - 1) - int(model_df)
    p = sum_p_values(np.sqrt(z2), lag_correlation(r, horizon), horizon, lags, model_df)
    return statistic, df, p

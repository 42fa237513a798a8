"""Evidence of a trend or a unit root, for many series of one length at once.

Three checks that tell a deterministic trend from a stochastic one (a unit root)
and from stationarity:

* :func:`adf_trend_rows`, the augmented Dickey-Fuller test with a constant and a
  linear trend (null: unit root, possibly with drift);
* :func:`kpss_rows`, the KPSS test (null: level or trend stationarity), whose
  p-values come from a four-entry table and are clipped to [0.01, 0.10];
* :func:`trend_slope`, the least-squares slope on time with a Newey-West
  standard error.

The tests have opposite nulls, so their verdicts are read together; a test that does
not reject is not proof of the null, and the p-values are asymptotic approximations,
rough for short series. :func:`ols_rows` is the batched least squares (statsmodels'
``OLS`` arithmetic) that the ADF regression here and the ARCH-LM regression in
:mod:`lagsight.engine.evidence` share.

References
----------
.. [1] Said, S. E. and Dickey, D. A. (1984). Testing for unit roots in autoregressive-moving
   average models of unknown order. Biometrika 71, 599-607.
.. [2] MacKinnon, J. G. (1994). Approximate asymptotic distribution functions for unit-root and
   cointegration tests. Journal of Business and Economic Statistics 12, 167-176.
.. [3] Kwiatkowski, D., Phillips, P. C. B., Schmidt, P. and Shin, Y. (1992). Testing the null
   hypothesis of stationarity against the alternative of a unit root. Journal of
   Econometrics 54, 159-178.
.. [4] Hobijn, B., Franses, P. H. and Ooms, M. (2004). Generalizations of the KPSS-test for
   stationarity. Statistica Neerlandica 58, 483-502.
.. [5] Newey, W. K. and West, K. D. (1987). A simple, positive semi-definite, heteroskedasticity
   and autocorrelation consistent covariance matrix. Econometrica 55, 703-708.
"""
from __future__ import annotations

import math
import warnings
from typing import NamedTuple

import numpy as np
from scipy.special import ndtr
from statsmodels.tsa.stattools import adfuller

from lagsight.engine.stationarity import first_t, lagged_differences, thin_svd

from .autocorrelation import acf, autocovariance, center
from .stationarity import ADF_MAX_POINTS, CHUNK_VALUES, _schwert_lags


def ols_rows(design: np.ndarray, y: np.ndarray):
    """Least squares per row as statsmodels' ``OLS`` (method "pinv") computes it.

    Parameters
    ----------
    design : ndarray, shape (m, nobs, k)
    y : ndarray, shape (m, nobs)

    Returns
    -------
    params : ndarray, shape (m, k)
    resid : ndarray, shape (m, nobs)
    pinv : ndarray, shape (m, k, nobs)
        The pseudo-inverse; ``pinv @ pinv.T`` is the unscaled parameter covariance.
    full_rank : ndarray of bool, shape (m,)
        The rank by ``numpy.linalg.matrix_rank``'s tolerance equals k.

    Notes
    -----
    The pseudo-inverse comes from the SVD with singular values below 1e-15 times the
    largest dropped, as in ``statsmodels.tools.tools.pinv_extended`` (and in
    ``stationarity._adf_block``).
    """
    k = design.shape[2]
    u, sv, vt = thin_svd(design)
    top = np.maximum.reduce(sv, axis=1, keepdims=True)
    with np.errstate(divide="ignore"):
        inv = np.where(sv > 1e-15 * top, 1.0 / sv, 0.0)
    pinv = np.matmul(np.swapaxes(vt, 1, 2), inv[:, :, None] * np.swapaxes(u, 1, 2))
    params = np.matmul(pinv, y[:, :, None])[:, :, 0]
    resid = y - np.matmul(design, params[:, :, None])[:, :, 0]
    full_rank = (sv > top * k * np.finfo(np.float64).eps).sum(axis=1) == k
    return params, resid, pinv, full_rank


#: MacKinnon's p-value for the ADF t-statistic, one I(1) series, constant and linear trend
#: ("ct"): as statsmodels.tsa.adfvalues stores them (tau_ct_smallp, tau_ct_largep, rows N = 1),
#: raw table values times its small_scaling / large_scaling factors.
TAU_MAX_CT, TAU_MIN_CT, TAU_STAR_CT = 0.7, -16.18, -2.89
TAU_CT_SMALL_P = np.array([3.2512, 1.6047, 4.9588]) * np.array([1, 1, 1e-2])  # t**0, t**1, t**2
TAU_CT_LARGE_P = np.array([2.5261, 6.1654, -3.7956, -6.0285]) * np.array([1, 1e-1, 1e-1, 1e-2])  # t**0..t**3


def mackinnon_p_ct(t: np.ndarray) -> np.ndarray:
    """Approximate p-values of ADF t-statistics with constant and trend [2]_, elementwise.

    1 above TAU_MAX_CT, 0 below TAU_MIN_CT, else Phi(polynomial in t), the small-p
    polynomial up to TAU_STAR_CT, as ``mackinnonp(t, regression="ct", N=1)``.
    """
    t = np.asarray(t, dtype=np.float64)
    p = np.where(t <= TAU_STAR_CT, ndtr(np.polyval(TAU_CT_SMALL_P[::-1], t)),
                 ndtr(np.polyval(TAU_CT_LARGE_P[::-1], t)))
    return np.where(t > TAU_MAX_CT, 1.0, np.where(t < TAU_MIN_CT, 0.0, p))


class RowTest(NamedTuple):
    """Per-row results of a test: statistic, p-value and the lags it used (int), each shape (m,)."""

    statistic: np.ndarray
    p_value: np.ndarray
    lags: np.ndarray


def adf_trend_lags(n: int) -> int:
    """Schwert's floor(12 (n/100)^(1/4)) capped at n // 2 - 3, the most ``adfuller`` accepts with "ct"."""
    return max(min(_schwert_lags(n), n // 2 - 3), 0)


def adf_trend_rows(x: np.ndarray) -> RowTest:
    """Augmented Dickey-Fuller test with a constant and a linear trend, per row.

    Parameters
    ----------
    x : ndarray, shape (m, n)
        Finite, non-constant rows, n >= 10. Rows longer than
        ``stationarity.ADF_MAX_POINTS`` are tested on their last values, as in
        ``stationarity.adf_rows``.

    Returns
    -------
    RowTest
        ``statistic`` (the t-statistic of the lagged level), ``p_value`` (MacKinnon's
        approximation, "ct" surface) and ``lags`` (the lagged differences used, equal for all rows).

    Notes
    -----
    The regression of ``statsmodels.tsa.stattools.adfuller(x, maxlag=L, autolag=None,
    regression="ct")``: dx_t on x_{t-1}, dx_{t-1}..dx_{t-L}, a constant and t = 1..nobs,
    with L from :func:`adf_trend_lags` (Schwert's rule as in ``stationarity``, capped at
    n // 2 - 3 rather than n // 2 - 2 because the trend is one more regressor). A small
    p-value rejects a unit root in favour of stationarity around a linear trend. Rows
    whose design is rank-deficient (for example an exact straight line) are handed to
    ``adfuller`` itself, which drops a duplicate constant.

    References
    ----------
    Said and Dickey (1984) [1]_; MacKinnon (1994) [2]_ (module docstring).
    """
    x = np.asarray(x, dtype=np.float64)[:, -ADF_MAX_POINTS:]
    m, n = x.shape
    lags = adf_trend_lags(n)
    rows = max(1, CHUNK_VALUES // ((n - 1 - lags) * (lags + 3)))
    stat = np.concatenate([_adf_trend_block(x[s:s + rows], lags) for s in range(0, m, rows)])
    return RowTest(stat, mackinnon_p_ct(np.where(np.isfinite(stat), stat, 0.0)), np.full(m, lags))


def _adf_trend_block(x: np.ndarray, lags: int) -> np.ndarray:
    m, n = x.shape
    k = lags + 3
    nobs = n - 1 - lags
    dx = np.diff(x, axis=1)
    # adfuller's columns: x_{t-1}, dx_{t-1}..dx_{t-lags}, constant, trend; then the response dx_t
    augmented = np.empty((m, nobs, k + 1))
    augmented[:, :, 0] = x[:, lags:n - 1]
    lagged_differences(augmented, dx, lags)
    augmented[:, :, k - 2] = 1.0
    augmented[:, :, k - 1] = np.arange(1.0, nobs + 1.0)
    augmented[:, :, k] = dx[:, lags:]
    stat, full_rank = first_t(augmented)
    for i in np.flatnonzero(~(full_rank & np.isfinite(stat))):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # statsmodels' notices on short series and its tuple return
            stat[i] = float(adfuller(x[i], maxlag=lags, autolag=None, regression="ct")[0])
    return stat


#: KPSS critical values (upper tail) at KPSS_P = 10%, 5%, 2.5%, 1% [3]_, as statsmodels' kpss uses them.
KPSS_CRIT = {"c": np.array([0.347, 0.463, 0.574, 0.739]), "ct": np.array([0.119, 0.146, 0.176, 0.216])}
KPSS_P = np.array([0.10, 0.05, 0.025, 0.01])


class KpssRows(NamedTuple):
    """Per-row KPSS results, each shape (m,); ``clipped`` marks p-values at a table end."""

    statistic: np.ndarray
    p_value: np.ndarray
    lags: np.ndarray
    clipped: np.ndarray


def kpss_rows(x: np.ndarray, regression: str = "c", nlags: str = "legacy") -> KpssRows:
    """KPSS stationarity test per row, as ``statsmodels.tsa.stattools.kpss``.

    Parameters
    ----------
    x : ndarray, shape (m, n)
        Finite, non-constant rows (n >= 3).
    regression : {"c", "ct"}, default "c"
        "c": null of stationarity around a level; "ct": around a linear trend.
    nlags : {"legacy", "auto"}, default "legacy"
        Bartlett-window width of the long-run variance. "legacy":
        min(ceil(12 (n/100)^(1/4)), n - 1), the same for every row (statsmodels rounds up here,
        unlike the floor of Schwert's rule used by the ADF checks). "auto": the data-dependent
        rule of Hobijn, Franses and Ooms [4]_ as statsmodels applies it, per row.

    Returns
    -------
    KpssRows
        ``statistic``, ``p_value``, ``lags`` (int, per row) and ``clipped``. The p-value is
        interpolated linearly in the four-entry table of [3]_ (``np.interp`` on
        :data:`KPSS_CRIT`), hence confined to [0.01, 0.10]: where ``clipped`` is True the
        statistic lies outside the table and the true p-value is below 0.01 (p_value == 0.01)
        or above 0.10 (p_value == 0.10). statsmodels warns in that case; this function emits
        no warning, so callers must read ``clipped``. Where the residuals vanish (an exact line
        under "ct") the statistic and p-value are NaN.

    Notes
    -----
    With e the residuals from the row mean ("c") or from a least-squares line ("ct"),
    S_t their partial sums, c_j their biased autocovariances and w_j = 1 - j/(L + 1):

        statistic = (sum_t S_t^2 / n^2) / (c_0 + 2 sum_{j=1..L} w_j c_j).

    The "auto" lag is int(1.1447 (s^2)^(1/3) n^(1/3)) with s = 2 sum j c_j / (c_0 + 2 sum c_j),
    sums over j = 1..int(n^(2/9)), capped at n - 1 (also when s is infinite, where statsmodels
    fails). It equals statsmodels' choice except where 1.1447 (s^2)^(1/3) n^(1/3) lies within
    rounding of an integer (the sums are formed in another order). The critical values are
    those of [3]_, Table 1, as statsmodels stores them.

    References
    ----------
    Kwiatkowski, Phillips, Schmidt and Shin (1992) [3]_; Hobijn, Franses and Ooms (2004) [4]_
    (module docstring).
    """
    if regression not in KPSS_CRIT:
        raise ValueError(f"regression must be 'c' or 'ct', got {regression!r}")
    if nlags not in ("legacy", "auto"):
        raise ValueError(f"nlags must be 'legacy' or 'auto', got {nlags!r}")
    e = center(x)  # exact power-of-two rescaling: the statistic is scale-free
    m, n = e.shape
    if regression == "ct":
        s = np.arange(n) - (n - 1) / 2.0
        e = e - (np.vecdot(e, s) / np.vecdot(s, s))[:, None] * s
    partial = np.cumsum(e, axis=1)
    eta = np.vecdot(partial, partial) / float(n) ** 2
    if nlags == "legacy":
        lags = np.full(m, min(math.ceil(12.0 * (n / 100.0) ** 0.25), n - 1))
    else:
        cover = int(np.power(n, 2.0 / 9.0))
        c = autocovariance(e, max(min(cover, n - 1), 1))[:, : cover + 1]
        j = np.arange(1, cover + 1)
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = 2.0 * np.vecdot(c[:, 1:], j) / (c[:, 0] + 2.0 * np.add.reduce(c[:, 1:], axis=1))
            width = 1.1447 * np.power(ratio * ratio, 1.0 / 3.0) * np.power(n, 1.0 / 3.0)
        lags = np.where(np.isfinite(width), np.minimum(np.floor(width), n - 1), n - 1).astype(np.intp)
    top = int(lags.max())
    c = autocovariance(e, max(top, 1))
    j = np.arange(top + 1)
    w = np.where(j[None, :] <= lags[:, None], 1.0 - j[None, :] / (lags[:, None] + 1.0), 0.0)
    w[:, 1:] *= 2.0
    with np.errstate(divide="ignore", invalid="ignore"):  # NaN for residuals that are all zero (an exact line)
        statistic = eta / np.vecdot(c[:, : top + 1], w)
    p_value = np.interp(statistic, KPSS_CRIT[regression], KPSS_P)
    clipped = (p_value == KPSS_P[0]) | (p_value == KPSS_P[-1])
    return KpssRows(statistic, p_value, lags, clipped)


def newey_west_lags(n: int) -> int:
    """floor(4 (n/100)^(2/9)), the default of ``statsmodels.stats.sandwich_covariance.S_hac_simple``."""
    return int(np.floor(4 * (n / 100.0) ** (2.0 / 9.0)))


class TrendFit(NamedTuple):
    """Per-row least-squares trend, each shape (m,)."""

    slope: np.ndarray
    se: np.ndarray
    t: np.ndarray
    p_value: np.ndarray
    resid_r1: np.ndarray
    lags: int


def trend_slope(x: np.ndarray, lags: int | None = None) -> TrendFit:
    """Least-squares line x_t = a + b t per row, with a Newey-West t-statistic for b.

    Parameters
    ----------
    x : ndarray, shape (m, n)
        Finite rows, n >= 3.
    lags : int, optional
        Bartlett-window width of the HAC variance, 1 <= lags <= n - 1; default
        floor(4 (n/100)^(2/9)) (:func:`newey_west_lags`, statsmodels' default for ``S_hac_simple``;
        common practice).

    Returns
    -------
    TrendFit
        ``slope`` b per time step, ``se`` its HAC standard error, ``t`` = b / se, ``p_value``
        two-sided from the standard normal (asymptotic), ``resid_r1`` the lag-1 autocorrelation
        of the residuals, and ``lags`` used.

    Notes
    -----
    With s_t = t - mean(t), residuals u_t and v_t = u_t s_t, the Bartlett-kernel HAC
    variance [5]_ of b is

        n (c_0(v) + 2 sum_{j=1..L} (1 - j/(L + 1)) c_j(v)) / (sum_t s_t^2)^2,

    c_j(v) the biased autocovariances of v. It equals
    ``OLS(x, add_constant(t)).fit(cov_type="HAC", cov_kwds={"maxlags": L})`` with that
    method's default ``use_correction=False`` (no n / (n - 2) factor) and its normal
    p-values. A trend t-statistic is unreliable under a unit root (spurious regression);
    read it with :func:`adf_trend_rows` and :func:`kpss_rows`.

    References
    ----------
    Newey and West (1987) [5]_ (module docstring); the lag rule is common practice.
    """
    d = center(x, rescale=False)
    m, n = d.shape
    lags = newey_west_lags(n) if lags is None else int(lags)
    s = np.arange(n) - (n - 1) / 2.0
    sxx = np.vecdot(s, s)
    slope = np.vecdot(d, s) / sxx
    u = d - slope[:, None] * s
    c = autocovariance(u * s, lags)
    w = 2.0 * (1.0 - np.arange(1, lags + 1) / (lags + 1.0))
    se = np.sqrt(n * (c[:, 0] + np.vecdot(c[:, 1:], w))) / sxx
    with np.errstate(divide="ignore", invalid="ignore"):
        t = slope / se
        resid_r1 = acf(u, 1)[:, 0]
    return TrendFit(slope, se, t, 2.0 * ndtr(-np.abs(t)), resid_r1, lags)

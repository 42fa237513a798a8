"""A unit-root check that backs advice to difference: the augmented Dickey-Fuller test.

The test of ``statsmodels.tsa.stattools.adfuller`` with a constant and a fixed lag
order from Schwert's rule floor(12 (n/100)^(1/4)) [2]_ (``autolag=None``): one
regression instead of an information-criterion search over every order, which
was slow and erratic on a busy machine. A large p-value means a unit root
cannot be ruled out, which with a slowly decaying ACF supports differencing.

:func:`adf_rows` runs that regression for many series of one length at once: the
same design (x_{t-1}, the lagged differences, a constant), the same least squares
by the SVD pseudo-inverse that statsmodels' OLS uses, and MacKinnon's approximate
p-value [3]_ evaluated over the whole block (the response-surface coefficients for one
I(1) series with a constant, as ``statsmodels.tsa.adfvalues.mackinnonp`` uses them; the
tests compare the two); it agrees with ``adfuller`` to about 1e-14 and costs a fifth of
a call per series. A rank-deficient design (for example
a series whose differences are constant) is handed to ``adfuller`` itself, which
drops the duplicate constant.

References
----------
.. [1] Said, S. E. and Dickey, D. A. (1984). Testing for unit roots in autoregressive-moving
   average models of unknown order. Biometrika 71, 599-607.
.. [2] Schwert, G. W. (1989). Tests for unit roots: a Monte Carlo investigation. Journal of
   Business and Economic Statistics 7, 147-159.
.. [3] MacKinnon, J. G. (1994). Approximate asymptotic distribution functions for unit-root and
   cointegration tests. Journal of Business and Economic Statistics 12, 167-176.
"""
from __future__ import annotations

import math
import warnings

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view
from scipy.special import ndtr
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


#: MacKinnon's p-value for the ADF t-statistic, one I(1) series, regression with a constant:
#: 1 above TAU_MAX, 0 below TAU_MIN, else Phi(polynomial in t), the small-p polynomial up to TAU_STAR.
TAU_MAX, TAU_MIN, TAU_STAR = 2.74, -18.83, -1.61
TAU_SMALL_P = np.array([2.1659, 1.4412, 0.038269])  # coefficients of t**0, t**1, t**2
TAU_LARGE_P = np.array([1.7339, 0.93202, -0.12745, -0.010368])  # t**0 .. t**3


def mackinnon_p(t: np.ndarray) -> np.ndarray:
    """Approximate p-values of ADF t-statistics (constant, no trend) [3]_, elementwise."""
    t = np.asarray(t, dtype=np.float64)
    p = np.where(t <= TAU_STAR, ndtr(np.polyval(TAU_SMALL_P[::-1], t)), ndtr(np.polyval(TAU_LARGE_P[::-1], t)))
    return np.where(t > TAU_MAX, 1.0, np.where(t < TAU_MIN, 0.0, p))


#: Values of design matrix per chunk of rows in :func:`adf_rows` (2**21 float64 = 16 MiB).
CHUNK_VALUES = 1 << 21


def _schwert_lags(n: int) -> int:
    return max(min(int(12 * (n / 100.0) ** 0.25), n // 2 - 2), 0)


def adf(x: np.ndarray) -> tuple[float, float, int]:
    """ADF statistic, p-value and lags used, for one series (its last ADF_MAX_POINTS values)."""
    return adf_rows(np.asarray(x, dtype=np.float64)[None, :])[0]


def _adfuller(x: np.ndarray, lags: int) -> tuple[float, float, int]:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # statsmodels may warn on short series; the numbers stand
        stat, p, used, *_ = adfuller(x, maxlag=lags, autolag=None)
    return float(stat), float(p), int(used)


def adf_rows(x: np.ndarray) -> list[tuple[float, float, int]]:
    """ADF statistic, p-value and lags used for each row (rows of equal length, at least 10 values)."""
    x = np.asarray(x, dtype=np.float64)[:, -ADF_MAX_POINTS:]
    m, n = x.shape
    lags = _schwert_lags(n)
    k = lags + 2
    nobs = n - 1 - lags
    rows = max(1, CHUNK_VALUES // (nobs * k))
    out: list[tuple[float, float, int]] = []
    for start in range(0, m, rows):
        out.extend(_adf_block(x[start:start + rows], lags))
    return out


def thin_svd(a: np.ndarray):
    """The thin SVD of a stack of tall matrices (m, rows, k), by a QR first and the SVD of the small R.

    The same factors as ``np.linalg.svd(a, full_matrices=False)`` to rounding, at a fraction of the cost when
    rows >> k (LAPACK's SVD of a tall matrix does far more work than its QR).
    """
    q, r = np.linalg.qr(a)
    ur, sv, vt = np.linalg.svd(r)
    return np.matmul(q, ur), sv, vt


def first_t(augmented: np.ndarray, tri: np.ndarray | None = None, k: int | None = None
            ) -> tuple[np.ndarray, np.ndarray]:
    """The t-statistic of the first coefficient of least squares per row, from the triangle of one QR.

    Parameters
    ----------
    augmented : ndarray, shape (m, nobs, c + 1)
        The design (c columns) with the response as its last column; nobs >= c + 1.
    tri : ndarray, shape (m, c + 1, c + 1), optional
        Its triangle, when already computed (see :func:`adf_pair_rows`).
    k : int, optional (default c)
        Regress on the first k columns of the design only: the triangle of the whole serves every leading
        subset of its columns (its rows k.. of the last column hold the rest of the response).

    Returns
    -------
    t : ndarray, shape (m,)
        beta_0 / sqrt(s^2 (X'X)^+_00), s^2 = RSS / (nobs - k), as statsmodels' OLS (method "pinv") gives it;
        NaN where the design is rank-deficient.
    full_rank : ndarray of bool, shape (m,)
        The rank by ``numpy.linalg.matrix_rank``'s tolerance equals k (callers hand the other rows to
        statsmodels).

    Notes
    -----
    The QR of [X | y] (triangle only, no Q) holds everything the statistic needs: its top-left k x k block is
    R of X = QR, the column above the corner is Q'y, and the corner is the residual norm. The pseudo-inverse
    of X is V S^+ U' Q' with R = U S V' (the SVD of the small R, singular values below 1e-15 x the largest
    dropped, as ``statsmodels.tools.tools.pinv_extended``), so beta = V S^+ U' Q'y and (X'X)^+_00 is the
    squared norm of the first row of V S^+. This is the same arithmetic as forming Q and the pseudo-inverse, to
    rounding, at about half the cost of a full QR and without the (k, nobs) pseudo-inverse. Where the triangle
    is certainly of full rank (by norms: :func:`_first_t_by_inverse`) the pseudo-inverse is the inverse, and
    the first row of R^-1 serves (a fifth of the small SVD's cost); the SVD runs only for the other rows.
    """
    nobs, c1 = augmented.shape[1:]
    k = c1 - 1 if k is None else k
    if tri is None:
        tri = np.linalg.qr(augmented, mode="r")
    t, sure = _first_t_by_inverse(tri, nobs, k)
    if sure.all():
        return t, sure
    rest = np.flatnonzero(~sure)
    t[rest], full_rank = _first_t_by_svd(tri[rest], nobs, k)
    sure[rest] = full_rank
    return t, sure


def _first_t_by_inverse(tri: np.ndarray, nobs: int, k: int) -> tuple[np.ndarray, np.ndarray]:
    """:func:`first_t` by the inverse of the triangle, for the rows it shows to have full rank.

    Where the rank is full the pseudo-inverse is the inverse, and the first row of R^-1 gives beta_0 (with Q'y)
    and (X'X)^-1_00 (its squared norm). The rank is certainly full by ``matrix_rank``'s tolerance when
    ||R||_F ||R^-1||_F k eps < 1 (the largest singular value is at most ||R||_F, the smallest at least
    1 / ||R^-1||_F); the other rows (False in the second array) are for the SVD.
    """
    r = tri[:, :k, :k]
    diagonal = np.abs(np.diagonal(r, axis1=1, axis2=2))
    usable = (diagonal > 0).all(axis=1)
    with np.errstate(all="ignore"):
        inverse = np.linalg.inv(np.where(usable[:, None, None], r, np.eye(k)))
        size = np.sqrt(np.vecdot(r, r, axis=2).sum(axis=1))
        inverse_size = np.sqrt(np.vecdot(inverse, inverse, axis=2).sum(axis=1))
        sure = usable & (size * inverse_size * (k * np.finfo(np.float64).eps) < 1.0)
        weights = inverse[:, 0, :]  # first row of R^-1
        beta0 = np.vecdot(weights, tri[:, :k, -1])
        rss = np.vecdot(tri[:, k:, -1], tri[:, k:, -1])
        t = beta0 / np.sqrt(rss / (nobs - k) * np.vecdot(weights, weights))
    return np.where(sure, t, np.nan), sure


def _first_t_by_svd(tri: np.ndarray, nobs: int, k: int) -> tuple[np.ndarray, np.ndarray]:
    u, sv, vt = np.linalg.svd(tri[:, :k, :k])
    top = np.maximum.reduce(sv, axis=1, keepdims=True)
    with np.errstate(divide="ignore"):
        inv = np.where(sv > 1e-15 * top, 1.0 / sv, 0.0)
    weights = vt[:, :, 0] * inv  # first row of V S^+
    beta0 = np.vecdot(weights, np.matmul(tri[:, None, :k, -1], u)[:, 0, :])
    rss = np.vecdot(tri[:, k:, -1], tri[:, k:, -1])
    se = np.sqrt(rss / (nobs - k) * np.vecdot(weights, weights))
    full_rank = (sv > top * k * np.finfo(np.float64).eps).sum(axis=1) == k
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(full_rank, beta0 / se, np.nan), full_rank


def lagged_differences(augmented: np.ndarray, dx: np.ndarray, lags: int) -> None:
    """Write dx_{t-1}..dx_{t-lags} into columns 1..lags of ``augmented`` (m, n - 1 - lags, c), for
    t = lags..n - 2 (dx of shape (m, n - 1)): one strided copy of the windows of dx, not one per lag."""
    if lags:
        windows = sliding_window_view(dx, lags + 1, axis=1)  # windows[:, t, j] = dx[:, t + j], no copy
        augmented[:, :, 1:lags + 1] = windows[:, :, lags - 1::-1]


def _adf_block(x: np.ndarray, lags: int) -> list[tuple[float, float, int]]:
    m, n = x.shape
    k = lags + 2
    nobs = n - 1 - lags
    dx = np.diff(x, axis=1)
    # adfuller's columns: x_{t-1}, dx_{t-1}, ..., dx_{t-lags}, constant; then the response dx_t
    augmented = np.empty((m, nobs, k + 1))
    augmented[:, :, 0] = x[:, lags : n - 1]
    lagged_differences(augmented, dx, lags)
    augmented[:, :, k - 1] = 1.0
    augmented[:, :, k] = dx[:, lags:]
    stat, full_rank = first_t(augmented)
    pvalue = mackinnon_p(np.where(np.isfinite(stat), stat, 0.0))
    out = []
    for i, (t, p, ok) in enumerate(zip(stat.tolist(), pvalue.tolist(), full_rank.tolist())):
        out.append((t, p, lags) if ok and math.isfinite(t) else _adfuller(x[i], lags))
    return out


def adf_pair_rows(x: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """ADF p-values with a constant, and t-statistics with a constant and a linear trend, per row, from one QR.

    The designs are nested (the trend is one more column after the constant) when both use the same lags,
    as they do from 10 values on (Schwert's rule capped at n // 2 - 2 and n // 2 - 3): the triangle of
    [x_{t-1}, lags, constant, trend | dx_t] serves both (:func:`first_t` with ``k``). The same numbers as
    :func:`adf_rows` and ``trend.adf_trend_rows`` to rounding; rows they hand to ``adfuller`` (rank-deficient
    designs) come back NaN for the caller to do the same. None when the two tests' lags differ (short series).
    """
    x = np.asarray(x, dtype=np.float64)[:, -ADF_MAX_POINTS:]
    m, n = x.shape
    lags = _schwert_lags(n)
    if lags != max(min(int(12 * (n / 100.0) ** 0.25), n // 2 - 3), 0):  # trend.adf_trend_lags
        return None
    k = lags + 3
    nobs = n - 1 - lags
    rows = max(1, CHUNK_VALUES // (nobs * (k + 1)))
    p_const, t_trend = np.empty(m), np.empty(m)
    for start in range(0, m, rows):
        block = x[start:start + rows]
        dx = np.diff(block, axis=1)
        augmented = np.empty((block.shape[0], nobs, k + 1))
        augmented[:, :, 0] = block[:, lags:n - 1]
        lagged_differences(augmented, dx, lags)
        augmented[:, :, k - 2] = 1.0
        augmented[:, :, k - 1] = np.arange(1.0, nobs + 1.0)
        augmented[:, :, k] = dx[:, lags:]
        tri = np.linalg.qr(augmented, mode="r")
        t_const, _ = first_t(augmented, tri, k - 1)
        t_trend[start:start + rows], _ = first_t(augmented, tri)
        p_const[start:start + rows] = np.where(np.isfinite(t_const), mackinnon_p(np.where(np.isfinite(t_const),
                                                                                          t_const, 0.0)), np.nan)
    return p_const, t_trend

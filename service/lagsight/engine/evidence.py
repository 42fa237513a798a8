"""Evidence about why a series is not white noise, for many series of one length at once.

Checks that name a mechanism rather than only reject: autocorrelation that survives
heteroskedasticity (:func:`robust_acf_variance`, :func:`robust_portmanteau`),
autocorrelation of ranks, which single outliers cannot create (:func:`rank_acf`),
isolated outliers (:func:`outlier_flags`) and volatility clustering
(:func:`arch_lm_rows`). Trend and unit-root checks live in :mod:`lagsight.engine.trend`.

Each function takes rows x of shape (m, n), float64 and finite. A test that does not
reject is not proof of white noise; the p-values are asymptotic approximations, rough
for short series, and several tests on one series multiply the chances of a false alarm.

References
----------
.. [1] Diebold, F. X. (1986). Testing for serial correlation in the presence of ARCH.
   Proceedings of the Business and Economic Statistics Section, American Statistical
   Association, 323-328.
.. [2] Lobato, I., Nankervis, J. C. and Savin, N. E. (2001). Testing for autocorrelation using
   a modified Box-Pierce Q test. Journal of the American Statistical Association 96, 1066-1076.
.. [3] Dufour, J.-M. (1981). Rank tests for serial dependence. Journal of Time Series Analysis 2,
   117-128.
.. [4] Engle, R. F. (1982). Autoregressive conditional heteroscedasticity with estimates of the
   variance of United Kingdom inflation. Econometrica 50, 987-1007.
.. [5] Hampel, F. R. (1974). The influence curve and its role in robust estimation. Journal of
   the American Statistical Association 69, 383-393.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np
from scipy.special import chdtrc, ndtri

from .autocorrelation import acf, autocovariance, center
from .stationarity import CHUNK_VALUES
from .trend import RowTest, ols_rows


def robust_acf_variance(x: np.ndarray, max_lag: int, method: str = "auto") -> np.ndarray:
    """Heteroskedasticity-consistent variance factors tau_k of sqrt(n) r_k.

    Parameters
    ----------
    x : ndarray, shape (m, n)
        Finite, non-constant rows.
    max_lag : int
        Highest lag K, 1 <= K <= n - 1.
    method : {"auto", "direct", "fft"}, default "auto"
        How the lagged products are summed, as in
        :func:`lagsight.engine.autocorrelation.autocovariance` ("auto" picks by its cost model).

    Returns
    -------
    ndarray, shape (m, K)
        Column k - 1 holds

            tau_k = ((1/n) sum_{t=k+1..n} d_t^2 d_{t-k}^2) / gamma_0^2,

        d the row minus its mean and gamma_0 = (1/n) sum_t d_t^2.

    Notes
    -----
    Under a null of uncorrelated but possibly dependent values (for example ARCH or GARCH
    noise), sqrt(n) r_k has asymptotic variance tau_k rather than 1 [1]_, [2]_; tau_k is
    near (n - k)/n for i.i.d. values and above 1 under volatility clustering, where the
    usual +-z/sqrt(n) band is too narrow. A band of +-z sqrt(tau_k / n) keeps its level.
    The numerator is the uncentred lag-k autocovariance of d^2, so the same direct or FFT
    paths as the ACF compute it; tau is free of the row's scale.

    References
    ----------
    Diebold (1986) [1]_; Lobato, Nankervis and Savin (2001) [2]_ (module docstring).
    """
    d = center(x)  # exact power-of-two rescaling: tau does not depend on the scale
    d2 = d * d
    gamma0 = np.add.reduce(d2, axis=1) / d.shape[1]
    return autocovariance(d2, max_lag, method)[:, 1:] / (gamma0 * gamma0)[:, None]


def robust_portmanteau(r: np.ndarray, tau: np.ndarray, n: int, lags, model_df: int = 0):
    """Heteroskedasticity-robust Box-Pierce statistics Q*_L = n sum_{k<=L} r_k^2 / tau_k.

    Parameters
    ----------
    r : ndarray, shape (m, K)
        Autocorrelations r_1..r_K.
    tau : ndarray, shape (m, K)
        Variance factors from :func:`robust_acf_variance`.
    n : int
        Series length.
    lags : sequence of int
        Lags L to test, each 1 <= L <= K.
    model_df : int, default 0
        Fitted parameters subtracted from the degrees of freedom.

    Returns
    -------
    statistic : ndarray, shape (m, len(lags))
    df : ndarray of int, shape (len(lags),)
        ``L - model_df``.
    p_value : ndarray, shape (m, len(lags))
        Upper tail of chi-square(df) (``scipy.special.chdtrc``, the survival function, never
        1 - cdf); NaN where df <= 0.

    Notes
    -----
    The modified Box-Pierce test of [2]_ with the variance estimate of [1]_. Its chi-square
    limit holds for uncorrelated series with conditional heteroskedasticity of the kind
    covered in [2]_; for a model's residuals, taking L - model_df degrees of freedom is
    carried over from the Box-Pierce test (common practice, no source). Not rejecting is no
    proof of white noise, and the chi-square approximation is rough for short series.

    References
    ----------
    Lobato, Nankervis and Savin (2001) [2]_ (module docstring).
    """
    r = np.asarray(r, dtype=np.float64)
    tau = np.asarray(tau, dtype=np.float64)
    idx = np.asarray(lags, dtype=np.intp) - 1
    if idx.size == 0 or idx.min() < 0 or idx.max() >= r.shape[1]:
        raise ValueError(f"lags must lie between 1 and {r.shape[1]}")
    statistic = np.cumsum(n * (r * r) / tau, axis=1)[:, idx]
    df = idx + 1 - int(model_df)
    p_value = np.full(statistic.shape, np.nan)
    ok = df > 0
    p_value[:, ok] = chdtrc(df[ok], statistic[:, ok])
    return statistic, df, p_value


def average_ranks(x: np.ndarray) -> np.ndarray:
    """Ranks 1..n within each row, ties given their average rank (``scipy.stats.rankdata``'s "average")."""
    x = np.atleast_2d(np.asarray(x, dtype=np.float64))
    m, n = x.shape
    order = np.argsort(x, axis=1, kind="stable")
    ordered = np.take_along_axis(x, order, axis=1)
    starts = np.ones((m, n), dtype=bool)  # True where a run of equal values begins
    starts[:, 1:] = ordered[:, 1:] != ordered[:, :-1]
    ends = np.ones((m, n), dtype=bool)  # True where it ends
    ends[:, :-1] = starts[:, 1:]
    pos = np.arange(n)
    first = np.maximum.accumulate(np.where(starts, pos, 0), axis=1)
    last = np.minimum.accumulate(np.where(ends, pos, n - 1)[:, ::-1], axis=1)[:, ::-1]
    ranks = np.empty((m, n))
    np.put_along_axis(ranks, order, (first + last) / 2.0 + 1.0, axis=1)  # half-integers: exact
    return ranks


def rank_acf(x: np.ndarray, max_lag: int, method: str = "auto") -> np.ndarray:
    """Autocorrelations of the within-row ranks (a Spearman-type serial correlation).

    Parameters
    ----------
    x : ndarray, shape (m, n)
        Finite, non-constant rows.
    max_lag : int
        Highest lag K, 1 <= K <= n - 1.
    method : {"auto", "direct", "fft"}, default "auto"
        See :func:`lagsight.engine.autocorrelation.autocovariance`.

    Returns
    -------
    ndarray, shape (m, K)
        The usual (biased) sample ACF of :func:`average_ranks` of each row.

    Notes
    -----
    Ranks change only by order, so one huge value moves the rank ACF by about as much as
    any other value, where it can dominate the ordinary ACF; a large ordinary r_k with a
    small rank r_k points to outliers rather than autocorrelation. Rank autocorrelations
    are the basis of the rank tests for serial dependence of [3]_. The ranks of i.i.d.
    continuous values are a uniformly random permutation and their sum of squares is fixed,
    so E r_k = -(n - k)/(n (n - 1)) exactly (``bands.null_mean``; the tests check it over all
    permutations of a short row); the variance is near 1/n for long rows but not given by
    ``bands.null_variance`` (simulation at n = 40 puts it about 5% above at lag 1).

    References
    ----------
    Dufour (1981) [3]_ (module docstring).
    """
    return acf(average_ranks(x), max_lag, method)


#: MAD of a normal sample divided by this estimates sigma: Phi^{-1}(3/4) (1/0.6745 = 1.4826) [5]_.
NORMAL_MAD = float(ndtri(0.75))
#: Outlier threshold floor on the robust z (common practice, no source).
MIN_OUTLIER_Z = 5.0


class OutlierFlags(NamedTuple):
    """``mask`` (m, n) bool, robust ``z`` (m, n) and the ``threshold`` per row (m,)."""

    mask: np.ndarray
    z: np.ndarray
    threshold: np.ndarray


def outlier_threshold(n: int, alpha: float = 0.01) -> float:
    """max(Phi^{-1}(1 - alpha / (2n)), 5): Bonferroni over n two-sided checks, at least 5."""
    return max(float(-ndtri(alpha / (2.0 * n))), MIN_OUTLIER_Z)


def outlier_flags(x: np.ndarray, threshold: float | None = None, alpha: float = 0.01) -> OutlierFlags:
    """Values far from their row's median in units of its scaled MAD.

    Parameters
    ----------
    x : ndarray, shape (m, n)
        Finite rows.
    threshold : float, optional
        Flag where the robust z exceeds this; default :func:`outlier_threshold` (n, alpha).
    alpha : float, default 0.01
        Chance, for a normal i.i.d. row, that any value is flagged (Bonferroni bound), used
        only when ``threshold`` is None.

    Returns
    -------
    OutlierFlags
        ``z = |x - median| / (MAD / Phi^{-1}(3/4))`` per value (the MAD scaled to estimate a
        normal sigma, as ``scipy.stats.median_abs_deviation(scale="normal")``), ``mask = z >
        threshold``, and the threshold applied.

    Notes
    -----
    The default threshold is the normal quantile at alpha/(2n), so that a normal i.i.d.
    row of length n has at most probability alpha of any flag, floored at 5 (common practice,
    no source): for alpha = 0.01 the floor governs up to n of about 17,400. The MAD ignores up
    to half the values, so outliers do not mask one another as they do with the mean and
    standard deviation [5]_.

    Only the levels are checked. In a trending or wandering series distance from the median
    reflects the trend, not an outlier: pass detrended values or residuals, or first
    differences (``np.diff(x, axis=1)``; a single spike then appears as two opposite
    jumps, a level shift as one). Rows whose MAD is zero (more than half the values equal)
    get z = NaN and no flags: the robust scale is undefined there.

    References
    ----------
    Hampel (1974) [5]_ (module docstring) for the MAD; the threshold rule is common practice.
    """
    x = np.atleast_2d(np.asarray(x, dtype=np.float64))
    m, n = x.shape
    deviation = np.abs(x - np.median(x, axis=1, keepdims=True))
    scale = np.median(deviation, axis=1, keepdims=True) / NORMAL_MAD
    with np.errstate(divide="ignore", invalid="ignore"):
        z = np.where(scale > 0, deviation / scale, np.nan)
    c = outlier_threshold(n, alpha) if threshold is None else float(threshold)
    return OutlierFlags(np.greater(z, c, where=~np.isnan(z), out=np.zeros((m, n), dtype=bool)), z,
                        np.full(m, c))


def arch_lm_rows(x: np.ndarray, lags: int, demean: bool = True) -> RowTest:
    """Engle's Lagrange-multiplier test for ARCH effects, per row.

    Parameters
    ----------
    x : ndarray, shape (m, n)
        Finite rows (residuals, or a series whose mean is removed here).
    lags : int
        Lags q of the squared values in the auxiliary regression, 1 <= q and n - q > q + 1.
    demean : bool, default True
        Subtract each row's mean before squaring. ``statsmodels.stats.diagnostic.het_arch``
        squares the values as given, which equals ``demean=False``.

    Returns
    -------
    RowTest
        ``statistic`` LM = (n - q) R^2 of the least-squares regression of e_t^2 on a
        constant and e_{t-1}^2..e_{t-q}^2 (t = q+1..n); ``p_value`` from chi-square(q)
        (survival function); ``lags`` q. NaN where the squared values are constant.

    Notes
    -----
    The test of [4]_ in the form of ``het_arch(x, nlags=q)`` (its ``ddof=0``). A small
    p-value indicates volatility clustering (conditional heteroskedasticity); it also reacts to
    other non-linear dependence and to outliers, so read it beside :func:`outlier_flags`.

    References
    ----------
    Engle (1982) [4]_ (module docstring).
    """
    x = np.atleast_2d(np.asarray(x, dtype=np.float64))
    e = center(x) if demean else x  # R^2 is free of a power-of-two rescaling
    m, n = e.shape
    q = int(lags)
    nobs = n - q
    if q < 1 or nobs <= q + 1:
        raise ValueError(f"lags must satisfy 1 <= lags and n - lags > lags + 1, got {lags} for n = {n}")
    rows = max(1, CHUNK_VALUES // (nobs * (q + 1)))
    lm = np.concatenate([_arch_block(e[s:s + rows] ** 2, q) for s in range(0, m, rows)])
    return RowTest(lm, chdtrc(q, lm), np.full(m, q))


def _arch_block(e2: np.ndarray, q: int) -> np.ndarray:
    m, n = e2.shape
    nobs = n - q
    design = np.empty((m, nobs, q + 1))  # het_arch's columns: constant, e2_{t-1}, ..., e2_{t-q}
    design[:, :, 0] = 1.0
    for i in range(1, q + 1):
        design[:, :, i] = e2[:, q - i:n - i]
    y = e2[:, q:]
    _, resid, _, _ = ols_rows(design, y)
    dev = y - np.add.reduce(y, axis=1, keepdims=True) / nobs
    with np.errstate(divide="ignore", invalid="ignore"):
        r2 = 1.0 - np.vecdot(resid, resid) / np.vecdot(dev, dev)
    return nobs * r2

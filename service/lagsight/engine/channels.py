"""The channels' statistics of the verdict's evidence (:mod:`.whiteness`), for a block of rows: standardised
autocorrelations (classical or heteroskedasticity-consistent, with a horizon Bartlett's variance from lag H),
the component p-values on the chi-square and normal scales, and the volatility channel's rank statistic. The
null tables and the min-p adjustment that refer them live in :mod:`.whiteness`."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import chdtrc, ndtr

from lagsight.engine import horizon as ahead
from lagsight.engine.autocorrelation import autocovariance, center
from lagsight.engine.masked import center_observed, pair_counts
from lagsight.engine.ranks import tied_ranks

COMPONENTS = ("lag_one", "ljung_box_short", "ljung_box_long", "spike", "seasonal_spike", "rank_ljung_box", "rank_spike")


@dataclass(frozen=True)
class Layout:
    """Which components a block has: the key of its null table."""

    max_lag: int
    short: int
    seasonal: tuple[int, ...]
    horizon: int = 1  # lags 1..horizon - 1 are not tested (h-step forecast errors; see :mod:`.horizon`)

    @property
    def lags(self) -> tuple[int, ...]:
        return tuple(sorted({self.short, self.max_lag}))


def sidak(z: np.ndarray, count: int) -> np.ndarray:
    """P(the largest of `count` independent |N(0,1)| exceeds z), elementwise."""
    tail = np.clip(2.0 * ndtr(-np.asarray(z, dtype=np.float64)), 0.0, 1.0)
    with np.errstate(divide="ignore"):
        return np.where(tail >= 1.0, 1.0, -np.expm1(count * np.log1p(-tail)))


def standardised(x: np.ndarray, mask: np.ndarray | None, max_lag: int, robust: bool, horizon: int = 1):
    """z (m, K) and r (m, K) of the rows; with a mask, the amplitude-modulated estimate. Undefined z (a row
    without variation, a lag without pairs) are 0: no evidence. With a horizon h > 1 the variance at lags k >= h
    is Bartlett's (times :func:`.horizon.bartlett_factor`) and z at lags 1..h - 1 is 0: those lags are not tested."""
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        return _standardised_rows(x, mask, max_lag, robust, horizon)


def _standardised_rows(x: np.ndarray, mask: np.ndarray | None, max_lag: int, robust: bool, horizon: int = 1):
    m, n = x.shape
    k = np.arange(1, max_lag + 1)
    if mask is None:
        d = center(x)  # rescaled by a power of two: no overflow near the largest floats, ratios unchanged
        c = autocovariance(d, max_lag)
        r = c[:, 1:] / c[:, :1]
        v = (n - k) / (n * (n + 2.0))
        pairs = np.broadcast_to((n - k).astype(np.float64), r.shape)
        n_obs = np.full((m, 1), float(n))
    else:
        d = center_observed(x, mask)
        counts = pair_counts(mask, max_lag).astype(np.float64)
        c = autocovariance(d, max_lag) * n
        kk = np.arange(max_lag + 1)
        with np.errstate(divide="ignore", invalid="ignore"):
            c = (n - kk) / n * c / counts
        r = c[:, 1:] / c[:, :1]
        n_eff = n * counts[:, 1:] / (n - k)
        v = 1.0 / n_eff
        pairs = counts[:, 1:]
        n_obs = mask.sum(axis=1, keepdims=True).astype(np.float64)
    if horizon == 1:
        return _scaled(d, r, v, pairs, n_obs, max_lag, robust), r
    z = _scaled(d, r, v * ahead.bartlett_factor(r, horizon)[:, None], pairs, n_obs, max_lag, robust)
    z[:, : horizon - 1] = 0.0
    return z, r


def _scaled(d, r, v, pairs, n_obs, max_lag, robust) -> np.ndarray:
    n = d.shape[1]
    if robust:
        s = d * d
        num = autocovariance(s, max_lag)[:, 1:] * n / pairs
        g0 = s.sum(axis=1, keepdims=True) / n_obs
        tau = np.maximum(num / (g0 * g0), 1.0)
        z = r / np.sqrt(v * tau)
    else:
        z = r / np.sqrt(v)
    return np.nan_to_num(z, nan=0.0, posinf=0.0, neginf=0.0)


def components(z: np.ndarray, zr: np.ndarray, layout: Layout, model_df: int, r: np.ndarray | None = None,
                r_rank: np.ndarray | None = None) -> np.ndarray:
    """Component p-values (m, len(COMPONENTS)); 1.0 where a component is absent or undefined. With a horizon
    h > 1, ``r`` and ``r_rank`` (the autocorrelations behind z and zr) give the correlation between lags."""
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        if layout.horizon > 1:
            return np.nan_to_num(_horizon_values(z, zr, layout, model_df, r, r_rank), nan=1.0)
        return np.nan_to_num(_component_values(z, zr, layout, model_df), nan=1.0)


def _component_values(z: np.ndarray, zr: np.ndarray, layout: Layout, model_df: int) -> np.ndarray:
    m = z.shape[0]
    out = np.ones((m, len(COMPONENTS)))
    h, K = layout.short, layout.max_lag
    out[:, 0] = sidak(np.abs(z[:, 0]), 1)
    cum = np.cumsum(z * z, axis=1)
    if h - model_df > 0:
        out[:, 1] = chdtrc(h - model_df, cum[:, h - 1])
    if K != h and K - model_df > 0:
        out[:, 2] = chdtrc(K - model_df, cum[:, K - 1])
    out[:, 3] = sidak(np.abs(z[:, :h]).max(axis=1), h)
    if layout.seasonal:
        idx = np.asarray(layout.seasonal) - 1
        out[:, 4] = sidak(np.abs(z[:, idx]).max(axis=1), len(idx))
    if h - model_df > 0:
        out[:, 5] = chdtrc(h - model_df, (zr[:, :h] ** 2).sum(axis=1))
    out[:, 6] = sidak(np.abs(zr[:, :h]).max(axis=1), h)
    return out


def _horizon_values(z, zr, layout: Layout, model_df: int, r, r_rank) -> np.ndarray:
    """The components over lags H..: the first tested lag H alone, the sums from H (Box's scaled chi-square
    for correlated lags, :mod:`.horizon`), the spikes over H..short (Sidak: conservative for correlated lags)."""
    m = z.shape[0]
    out = np.ones((m, len(COMPONENTS)))
    H, h, K = layout.horizon, layout.short, layout.max_lag
    out[:, 0] = sidak(np.abs(z[:, H - 1]), 1)
    sums = ahead.sum_p_values(z, ahead.lag_correlation(r, H), H, (h, K), model_df)
    out[:, 1] = sums[:, 0]
    if K != h:
        out[:, 2] = sums[:, 1]
    out[:, 3] = sidak(np.abs(z[:, H - 1:h]).max(axis=1), h - H + 1)
    if layout.seasonal:
        idx = np.asarray(layout.seasonal) - 1
        out[:, 4] = sidak(np.abs(z[:, idx]).max(axis=1), len(idx))
    out[:, 5] = ahead.sum_p_values(zr[:, :h], ahead.lag_correlation(r_rank, H), H, (h,), model_df)[:, 0]
    out[:, 6] = sidak(np.abs(zr[:, H - 1:h]).max(axis=1), h - H + 1)
    return out


def volatility(x: np.ndarray, mask: np.ndarray | None, h: int, horizon: int = 1) -> np.ndarray:
    """Ljung-Box p-values at h of the ranks of |x - mean| (chi-square scale; referred to the null by callers);
    with a horizon H > 1, the sum over lags H..h with Bartlett's variance (the magnitudes of an MA(H - 1) error
    are correlated up to lag H - 1 too)."""
    d = center(x) if mask is None else center_observed(x, mask)  # scaled by a power of two: ranks unchanged
    a = tied_ranks(np.abs(d), mask)
    z, r = standardised(a, mask, h, robust=False, horizon=horizon)
    if horizon > 1:
        p = ahead.sum_p_values(z, ahead.lag_correlation(r, horizon), horizon, (h,))[:, 0]
        return np.nan_to_num(p, nan=1.0)
    return np.nan_to_num(chdtrc(h, (z * z).sum(axis=1)), nan=1.0)

"""The evidence behind the verdict: two channels of evidence against white noise for a block of series,
each with a p-value that holds at every length.

Autocorrelation channel
-----------------------
Standardised autocorrelations z_k = r_k / sqrt(v_k tau_k), k = 1..K, with v_k = (n - k) / (n (n + 2)) (the
Ljung-Box variance) and tau_k = max(1, hat tau_k), the heteroskedasticity-consistent factor

    hat tau_k = (sum over pairs of d_t^2 d_{t-k}^2 / N_k) / (sum d_t^2 / n)^2

of Diebold (1986) and Lobato, Nankervis and Savin (2001): changing variance alone (volatility clustering) is not
read as autocorrelation. It is floored at 1, so it never makes a statistic larger than the classical one.
The components are

- |z_1| alone (two-sided normal): most remaining structure (an AR or MA term left out) shows first at lag 1;
- the Ljung-Box-type sums Q_L = sum_{k <= L} z_k^2 at the short lag h and at K (chi-square, L - model_df df);
- the largest |z_k| over lags 1..h (Sidak-corrected normal tail);
- the largest |z_k| over the seasonal lags m, 2m, 3m within K, when a period is known;
- the sum at h and the largest spike over 1..h of the autocorrelations of the ranks (rank autocorrelation: a
  single outlier can hide or fake a correlation, it cannot move ranks much).

The smallest component p-value is referred to its own null distribution: REPLICATES i.i.d. normal series of the
same length (up to a capped length, see :func:`simulated_length`), seeded, with the classical statistics
(tau = 1). That is the min-p adjustment of Westfall and Young (1993): it accounts for the strong correlation among
the components (no Bonferroni waste) and for the small-sample bias of the chi-square and normal approximations
(the Ljung-Box test at lag K is liberal at n = 20-40). Beyond the table's resolution the adjusted p-value is the
Bonferroni bound, which is always valid.

Volatility channel
------------------
The Ljung-Box sum at h of the autocorrelations of the ranks of |x - mean|: clustering of large swings. Ranks
make it hold for heavy-tailed values, where the squared-value test (McLeod-Li) is unreliable; its p-value is
referred to the same simulated null.

With missing or filled values (a mask), the autocorrelations are the amplitude-modulated ones of
:mod:`.masked` with v_k = 1 / n_k, and the null is simulated at the observed length.

References
----------
.. [1] Diebold, F. X. (1986). Testing for serial correlation in the presence of ARCH. Proceedings of the
   Business and Economic Statistics Section, American Statistical Association, 323-328.
.. [2] Lobato, I., Nankervis, J. C. and Savin, N. E. (2001). Testing for autocorrelation using a modified
   Box-Pierce Q test. International Economic Review 42, 187-205.
.. [3] Westfall, P. H. and Young, S. S. (1993). Resampling-Based Multiple Testing. Wiley.
.. [4] Ljung, G. M. and Box, G. E. P. (1978). On a measure of lack of fit in time series models. Biometrika 65,
   297-303.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.special import chdtrc, ndtr

from lagsight.engine.autocorrelation import autocovariance
from lagsight.engine.masked import center_observed, pair_counts

#: Simulated series behind each null table, and the table's seed (fixed: the verdict is reproducible).
REPLICATES = 4000
NULL_SEED = 20_261_205
#: Lengths up to this are simulated exactly; longer ones at a grid length at most their own (conservative:
#: the approximations are more liberal at shorter lengths), at least 4 K.
EXACT_MAX_N = 50
_GRID = (50, 60, 70, 85, 100, 120, 150, 200, 250, 300, 400)
#: Values simulated per chunk when building a table (bounds memory).
_CHUNK_VALUES = 1 << 21

COMPONENTS = ("lag_one", "ljung_box_short", "ljung_box_long", "spike", "seasonal_spike", "rank_ljung_box", "rank_spike")


@dataclass(frozen=True)
class Layout:
    """Which components a block has: the key of its null table."""

    max_lag: int
    short: int
    seasonal: tuple[int, ...]

    @property
    def lags(self) -> tuple[int, ...]:
        return tuple(sorted({self.short, self.max_lag}))


@dataclass
class Evidence:
    """Per row: the channels' p-values and what the reading needs to name a mechanism."""

    z: np.ndarray  # (m, K) robust standardised autocorrelations
    z_rank: np.ndarray  # (m, K) standardised rank autocorrelations
    components: np.ndarray  # (m, 6) component p-values (1.0 where absent), in COMPONENTS order
    p_autocorrelation: np.ndarray  # (m,) min-p adjusted
    p_volatility: np.ndarray  # (m,) simulated-null p-value of the volatility channel
    p_spikes: np.ndarray  # (m,) Bonferroni over the spike components: a far tail that holds (for batches)
    layout: Layout
    simulated_n: int


def simulated_length(n: int, max_lag: int) -> int:
    """The length the null is simulated at: n up to EXACT_MAX_N, else a grid length <= n and >= 4 K (or n)."""
    if n <= EXACT_MAX_N:
        return n
    grid = max(g for g in _GRID if g <= n)
    return min(n, max(grid, 4 * max_lag))


def sidak(z: np.ndarray, count: int) -> np.ndarray:
    """P(the largest of `count` independent |N(0,1)| exceeds z), elementwise."""
    tail = np.clip(2.0 * ndtr(-np.asarray(z, dtype=np.float64)), 0.0, 1.0)
    with np.errstate(divide="ignore"):
        return np.where(tail >= 1.0, 1.0, -np.expm1(count * np.log1p(-tail)))


def _ranks(x: np.ndarray, mask: np.ndarray | None) -> np.ndarray:
    """Average ranks within each row (1..n_observed), missing entries ranked last; ties share their mean rank."""
    filled = x if mask is None else np.where(mask, x, np.inf)
    m, n = x.shape
    order = np.argsort(filled, axis=1)
    sorted_x = np.take_along_axis(filled, order, axis=1)
    tied = sorted_x[:, 1:] == sorted_x[:, :-1]
    positions = np.broadcast_to(np.arange(1, n + 1, dtype=np.float64), x.shape)
    if not tied.any():  # the common case: the rank is the position in the sorted row
        out = np.empty((m, n))
        np.put_along_axis(out, order, positions, axis=1)
        return out
    new = np.ones((m, n), dtype=bool)
    new[:, 1:] = ~tied
    flat = np.cumsum(new, axis=1) - 1 + np.arange(m)[:, None] * n  # tie-group id, unique across rows
    total = np.bincount(flat.ravel(), weights=positions.ravel(), minlength=m * n)
    count = np.bincount(flat.ravel(), minlength=m * n)
    mean_rank = (total / np.maximum(count, 1))[flat]
    out = np.empty((m, n))
    np.put_along_axis(out, order, mean_rank, axis=1)
    return out


def _standardised(x: np.ndarray, mask: np.ndarray | None, max_lag: int, robust: bool):
    """z (m, K) and r (m, K) of the rows; with a mask, the amplitude-modulated estimate. Undefined z (a row
    without variation, a lag without pairs) are 0: no evidence."""
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        return _standardised_rows(x, mask, max_lag, robust)


def _standardised_rows(x: np.ndarray, mask: np.ndarray | None, max_lag: int, robust: bool):
    m, n = x.shape
    k = np.arange(1, max_lag + 1)
    if mask is None:
        d = x - x.mean(axis=1, keepdims=True)
        d -= d.mean(axis=1, keepdims=True)
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
    return _scaled(d, r, v, pairs, n_obs, max_lag, robust), r


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


def _components(z: np.ndarray, zr: np.ndarray, layout: Layout, model_df: int) -> np.ndarray:
    """Component p-values (m, len(COMPONENTS)); 1.0 where a component is absent or undefined."""
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
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


def _volatility(x: np.ndarray, mask: np.ndarray | None, h: int) -> np.ndarray:
    """Ljung-Box p-values at h of the ranks of |x - mean| (chi-square scale; referred to the null by callers)."""
    if mask is None:
        centre = x.mean(axis=1, keepdims=True)
    else:
        centre = np.where(mask, x, 0.0).sum(axis=1, keepdims=True) / np.maximum(mask.sum(axis=1, keepdims=True), 1)
    a = _ranks(np.abs(x - centre), mask)
    z, _ = _standardised(a, mask, h, robust=False)
    return np.nan_to_num(chdtrc(h, (z * z).sum(axis=1)), nan=1.0)


@lru_cache(maxsize=256)
def null_table(n: int, layout: Layout) -> tuple[np.ndarray, np.ndarray]:
    """Sorted null draws of (smallest component p-value, volatility p-value) for i.i.d. normal series of length n."""
    rng = np.random.default_rng([NULL_SEED, n, layout.max_lag, layout.short, *layout.seasonal])
    rows = max(1, min(REPLICATES, _CHUNK_VALUES // n))
    minp, vol = [], []
    for start in range(0, REPLICATES, rows):
        x = rng.standard_normal((min(rows, REPLICATES - start), n))
        z, _ = _standardised(x, None, layout.max_lag, robust=False)
        zr, _ = _standardised(_ranks(x, None), None, layout.short, robust=False)
        minp.append(_components(z, zr, layout, 0).min(axis=1))
        vol.append(_volatility(x, None, layout.short))
    return np.sort(np.concatenate(minp)), np.sort(np.concatenate(vol))


def raw_threshold(n: int, layout: Layout, level: float) -> float:
    """The smallest component p-value at which the adjusted p-value falls below ``level`` (the level's quantile of
    the simulated null): each evidence entry can be compared with it."""
    table = null_table(n, layout)[0]
    i = int(np.floor(level * (table.size + 1.0))) - 1
    return float(table[i]) if i >= 0 else 0.0


def _refer(p: np.ndarray, table: np.ndarray, bound: np.ndarray) -> np.ndarray:
    """Share of null draws at or below p (with the +1 of an exact Monte Carlo p-value); the Bonferroni bound
    where p lies below every draw, since the table cannot resolve that tail."""
    count = np.searchsorted(table, p, side="right")
    simulated = (count + 1.0) / (table.size + 1.0)
    return np.where(count == 0, np.minimum(bound, simulated), simulated)


def evidence(x: np.ndarray, layout: Layout, model_df: int, mask: np.ndarray | None = None) -> Evidence:
    """The channels' evidence for every row of x (rows of equal length; NaN only where mask is False)."""
    x = np.atleast_2d(np.asarray(x, dtype=np.float64))
    m, n = x.shape
    if mask is not None and mask.all():
        mask = None
    z, _ = _standardised(x, mask, layout.max_lag, robust=True)
    zr, _ = _standardised(_ranks(x, mask), mask, layout.max_lag, robust=False)
    comps = _components(z, zr, layout, model_df)
    count = 5 + bool(layout.seasonal) + (layout.max_lag != layout.short)
    n_obs = n if mask is None else int(mask.sum(axis=1).min())
    n_sim = min(n, max(simulated_length(n_obs, layout.max_lag), layout.max_lag + 1))
    minp_table, vol_table = null_table(n_sim, layout)
    smallest = comps.min(axis=1)
    p_auto = _refer(smallest, minp_table, np.minimum(1.0, count * smallest))
    p_vol_raw = _volatility(x, mask, layout.short)
    p_vol = _refer(p_vol_raw, vol_table, p_vol_raw)
    spikes = comps[:, [3, 4, 6]] if layout.seasonal else comps[:, [3, 6]]
    p_spikes = np.minimum(1.0, spikes.shape[1] * spikes.min(axis=1))
    return Evidence(z, zr, comps, p_auto, p_vol, p_spikes, layout, n_sim)

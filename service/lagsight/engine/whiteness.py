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

The smallest component p-value is referred to its own null distribution: REPLICATES i.i.d. normal series of
about the same length (as the next paragraph says), seeded, with the classical statistics
(tau = 1). That is the min-p adjustment of Westfall and Young (1993): it accounts for the strong correlation among
the components (no Bonferroni waste) and for the small-sample bias of the chi-square and normal approximations
(the Ljung-Box test at lag K is liberal at n = 20-40). The adjusted p-value is the exact Monte Carlo one,
(draws at or below + 1) / (draws + 1), so it is never below the table's resolution 1 / (draws + 1).
Lengths above EXACT_MAX_N are simulated at a grid length at most their own and at least 4 K (a shorter length is
the more liberal one, so this errs on the safe side); long lengths get fewer draws (at most MAX_SIMULATED
values per table). A table is built once per process for each (length, layout) and kept; the tables of one
length, max_lag and seasonal lags come from the same seeded draws (the short lag only picks the lags they read).

With a horizon H > 1 (h-step forecast errors, :mod:`.horizon`) every component starts at lag H: z_k for k >= H
uses Bartlett's variance (times B = 1 + 2 sum_{j<H} r_j^2), z at lags below H is 0, and the sums take Box's scaled
chi-square for correlated lags. The draws (so the tables) are keyed by H; its i.i.d. null computes the same
statistics, so the estimation of B is in the reference (checked by simulation). A
table for H > 1 costs about what one for H = 1 does (CPU time 0.8-1.1 times, measured side by side at n 100-2,000).

Volatility channel
------------------
The Ljung-Box sum at h of the autocorrelations of the ranks of |x - mean|: clustering of large swings. Ranks
make it hold for heavy-tailed values, where the squared-value test (McLeod-Li) is unreliable; its p-value is
referred to the same simulated null.

With missing or filled values (a mask), the autocorrelations are the amplitude-modulated ones
(:mod:`.masked`) with v_k = 1 / n_k, and the null is simulated at the observed length.

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

import threading
from collections import OrderedDict
from dataclasses import dataclass

import numpy as np
from scipy.special import chdtrc

from lagsight.engine import channels
from lagsight.engine import horizon as ahead
from lagsight.engine.autocorrelation import center
from lagsight.engine.channels import Layout
from lagsight.engine.ranks import tied_ranks

#: Simulated series behind each null table, and the table's seed (fixed: the verdict is reproducible).
REPLICATES = 4000
NULL_SEED = 20_261_205
#: Values simulated for one null table at most (long lengths get fewer draws).
MAX_SIMULATED = 2_000_000
#: Lengths up to this are simulated exactly; longer ones at a grid length at most their own (conservative:
#: the approximations are more liberal at shorter lengths), at least 4 K.
EXACT_MAX_N = 50
_GRID = (50, 60, 70, 85, 100, 120, 150, 200, 250, 300, 400)
#: Values simulated per chunk when building a table (bounds memory).
_CHUNK_VALUES = 1 << 21

_lock = threading.Lock()  # the tables are shared by a worker's threads



@dataclass
class Evidence:
    """Per row: the channels' p-values and what the reading needs to name a mechanism."""

    z: np.ndarray  # (m, K) robust standardised autocorrelations
    z_rank: np.ndarray  # (m, K) standardised rank autocorrelations
    r: np.ndarray  # (m, K) the autocorrelations the evidence rests on (observed values only, with a mask)
    components: np.ndarray  # (m, 6) component p-values (1.0 where absent), in COMPONENTS order
    p_autocorrelation: np.ndarray  # (m,) min-p adjusted
    p_volatility: np.ndarray  # (m,) simulated-null p-value of the volatility channel
    p_tail: np.ndarray  # (m,) p_autocorrelation, with a far tail that holds beyond the table (for batches)
    layout: Layout
    simulated_n: np.ndarray  # (m,) the length each row's null was simulated at
    tied_share: np.ndarray  # (m,) share of the observed values equal to the most common one


def simulated_length(n: int, max_lag: int) -> int:
    """The length the null is simulated at.

    n itself up to EXACT_MAX_N (at least max_lag + 1); beyond, the largest grid length (50, 60, 70, 85, 100,
    120, 150, 200, 250, 300, 400, then steps of a quarter) that is at most n and at most max(400, 4 K), and above K. A shorter length's
    null is the more liberal one, so the verdict errs on the safe side; the grid keeps the number of tables
    small when a batch has many lengths.
    """
    if n <= EXACT_MAX_N:
        return max(n, max_lag + 1)  # with missing values the observed count can be at or below max_lag
    ceiling = min(n, max(400, 4 * max_lag))
    fitting = [g for g in _grid_upto(ceiling) if g > max_lag]
    return fitting[-1] if fitting else min(n, max_lag + 1)


def _grid_upto(limit: int) -> list[int]:
    out = [g for g in _GRID if g <= limit]
    g = _GRID[-1]
    while True:
        g = int(g * 1.25)
        if g > limit:
            return out
        out.append(g)


def replicates(n: int) -> int:
    """Null draws for length n: REPLICATES, fewer for long simulated lengths (at most MAX_SIMULATED values, at
    least 999 draws), so that one table costs at most a second or two."""
    return int(min(REPLICATES, max(999, MAX_SIMULATED // n)))


def table_cost(n_obs: int, layout: Layout) -> int:
    """Values simulated to build the null table a series of n_obs observed values needs, 0 when this process has
    it already: a request's cost estimate counts them, once per :func:`draw_key` (the tables of one key come
    from the same draws, see :func:`prepare_tables`)."""
    n = simulated_length(n_obs, layout.max_lag)
    return 0 if (n, layout) in _BUILT else replicates(n) * n


def draw_key(n_obs: int, layout: Layout) -> tuple:
    """The draws a table comes from: (simulated length, max_lag, seasonal lags, horizon); the short lag is not
    part of it."""
    return simulated_length(n_obs, layout.max_lag), layout.max_lag, layout.seasonal, layout.horizon


#: The (length, layout) keys whose table this process has built.
_BUILT: set = set()
_TABLES: OrderedDict = OrderedDict()
#: Null tables kept per process (two sorted arrays of at most REPLICATES values each).
TABLES_KEPT = 256


def _draws(n: int, max_lag: int, seasonal: tuple[int, ...], horizon: int = 1):
    """Standardised autocorrelations, rank autocorrelations and volatility-rank autocorrelations (each
    (draws, max_lag), with the autocorrelations behind each) of the seeded i.i.d. normal draws behind every table
    of (n, max_lag, seasonal, horizon); with a horizon H > 1 standardised as the evidence is (Bartlett's variance
    from lag H on)."""
    rng = np.random.default_rng([NULL_SEED + 1000 * (horizon - 1), n, max_lag, *seasonal])
    draws = replicates(n)
    rows = max(1, min(draws, _CHUNK_VALUES // n))
    z, zr, zv = [], [], []
    for start in range(0, draws, rows):
        x = rng.standard_normal((min(rows, draws - start), n))
        z.append(channels.standardised(x, None, max_lag, robust=False, horizon=horizon))
        zr.append(channels.standardised(tied_ranks(x, None), None, max_lag, robust=False, horizon=horizon))
        magnitudes = tied_ranks(np.abs(center(x)), None)
        zv.append(channels.standardised(magnitudes, None, max_lag, robust=False, horizon=horizon))
    return tuple(np.concatenate([pair[i] for pair in part]) for part in (z, zr, zv) for i in (0, 1))


def _table(n: int, layout: Layout, z, r, zr, r_rank, zv, r_vol):
    h, H = layout.short, layout.horizon
    minp = channels.components(z, zr, layout, 0, r, r_rank).min(axis=1)
    if H > 1:
        vol = ahead.sum_p_values(zv[:, :h], ahead.lag_correlation(r_vol, H), H, (h,))[:, 0]
    else:
        vol = chdtrc(h, (zv[:, :h] ** 2).sum(axis=1))
    table = np.sort(minp), np.sort(np.nan_to_num(vol, nan=1.0))
    with _lock:
        _TABLES[(n, layout)] = table
        _BUILT.add((n, layout))
        while len(_TABLES) > TABLES_KEPT:
            _BUILT.discard(_TABLES.popitem(last=False)[0])
    return table


def null_table(n: int, layout: Layout) -> tuple[np.ndarray, np.ndarray]:
    """Sorted null draws of (smallest component p-value, volatility p-value) for i.i.d. normal series of length n.

    Every layout with the same max_lag, seasonal lags and horizon is computed from the same seeded draws (the
    short lag only chooses which of their lags the components read), so :func:`prepare_tables` builds many at
    the cost of one and gives the same tables as building them one by one.
    """
    with _lock:
        if (n, layout) in _TABLES:
            _TABLES.move_to_end((n, layout))
            return _TABLES[(n, layout)]
    return _table(n, layout, *_draws(n, layout.max_lag, layout.seasonal, layout.horizon))


def prepare_tables(keys) -> None:
    """Build the null tables of (simulated length, layout) ``keys`` not built yet, one set of draws per
    (length, max_lag, seasonal lags, horizon): a batch of many lengths has one short lag per length, and each
    would otherwise simulate its own draws."""
    with _lock:
        missing = {key for key in keys if key not in _TABLES}
    by_draws: dict = {}
    for n, layout in missing:
        by_draws.setdefault((n, layout.max_lag, layout.seasonal, layout.horizon), []).append(layout)
    for (n, max_lag, seasonal, horizon), layouts in by_draws.items():
        arrays = _draws(n, max_lag, seasonal, horizon)
        for layout in layouts:
            _table(n, layout, *arrays)


def raw_threshold(n: int, layout: Layout, level: float) -> float:
    """The smallest component p-value at which the adjusted p-value falls below ``level`` (the level's quantile of
    the simulated null), so that each evidence entry can be compared with it. Where the table cannot resolve the
    level (a level below 1 / (draws + 1)), the Bonferroni threshold level / components."""
    table = null_table(n, layout)[0]
    i = int(np.floor(level * (table.size + 1.0))) - 1
    return float(table[i]) if i >= 0 else level / component_count(layout)


def component_count(layout: Layout) -> int:
    return 5 + bool(layout.seasonal) + (layout.max_lag != layout.short)


def _refer(p: np.ndarray, table: np.ndarray) -> np.ndarray:
    """The exact Monte Carlo p-value (count of null draws at or below p, plus one, over draws plus one): never
    below 1 / (draws + 1), the resolution of the table."""
    return (np.searchsorted(table, p, side="right") + 1.0) / (table.size + 1.0)


def evidence(x: np.ndarray, layout: Layout, model_df: int, mask: np.ndarray | None = None) -> Evidence:
    """The channels' evidence for every row of x (rows of equal length; NaN only where mask is False).

    Each row's null is simulated at the length of its own observed values (:func:`simulated_length`), so a
    row's evidence does not depend on the other rows of its block.
    """
    x = np.atleast_2d(np.asarray(x, dtype=np.float64))
    m, n = x.shape
    if mask is not None and mask.all():
        mask = None
    H = layout.horizon
    z, r = channels.standardised(x, mask, layout.max_lag, robust=True, horizon=H)
    largest_tie: list = []
    ranks = tied_ranks(x, mask, largest_tie)
    zr, r_rank = channels.standardised(ranks, mask, layout.max_lag, robust=False, horizon=H)
    comps = channels.components(z, zr, layout, model_df, r, r_rank)
    n_obs = np.full(m, n) if mask is None else mask.sum(axis=1)
    n_sim = np.array([simulated_length(int(k), layout.max_lag) for k in n_obs])
    smallest = comps.min(axis=1)
    p_vol_raw = channels.volatility(x, mask, layout.short, H)
    p_auto = np.empty(m)
    p_vol = np.empty(m)
    for length in np.unique(n_sim).tolist():
        rows = n_sim == length
        minp_table, vol_table = null_table(int(length), layout)
        p_auto[rows] = _refer(smallest[rows], minp_table)
        p_vol[rows] = _refer(p_vol_raw[rows], vol_table)
    # For a batch's false-discovery adjustment the p-value must hold far into its tail, beyond the table's
    # resolution: there the normal tails of the largest robust spike over every lag and of the rank spike
    # (Sidak, then Bonferroni over the two) are used; the chi-square tails of the sums are too light there.
    resolution = 1.0 / (REPLICATES + 1.0)
    largest = channels.sidak(np.abs(z).max(axis=1), layout.max_lag - H + 1)
    spikes = np.minimum(1.0, 2.0 * np.minimum(largest, comps[:, 6]))
    p_tail = np.where(p_auto > 2.0 * resolution, p_auto, np.minimum(p_auto, spikes))
    tied_share = largest_tie[0] / np.maximum(n_obs, 1)
    return Evidence(z, zr, np.nan_to_num(r), comps, p_auto, p_vol, p_tail, layout, n_sim, tied_share)

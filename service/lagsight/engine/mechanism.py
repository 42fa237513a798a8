"""The numbers that tell one mechanism of structure from another, for the rows that need them.

- the augmented Dickey-Fuller test with a constant (:mod:`.stationarity`) and with a constant and a linear trend
  (:mod:`.trend`): a deterministic trend (trend-stationary: the test with trend rejects a unit root) against a
  stochastic one (neither rejects);
- the least-squares slope with a Newey-West t-statistic (:func:`.trend.trend_slope`) and the KPSS test around a
  trend (:func:`.trend.kpss_rows`);
- isolated extreme values by the median/MAD rule (:func:`.evidence.outlier_flags`), on the values and on the
  first differences, so that a level that wanders is not taken for outliers.

The unit-root and trend numbers are computed only for the rows whose reading needs them (the ADF regressions are
the costly part); the outlier check for every complete row (a caution names isolated values even when the verdict
does not rest on them).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lagsight.engine import stationarity, trend
from lagsight.engine.evidence import outlier_flags

#: Below this length the regressions have too few degrees of freedom to be read.
MIN_N = 16
#: More far values than this share of a row are its distribution's tails, not isolated outliers.
MAX_OUTLIER_SHARE = 0.02


@dataclass
class Mechanism:
    """Per row (m,): NaN where not computed."""

    adf_p: np.ndarray  # ADF p-value, constant only
    adf_trend_p: np.ndarray  # ADF p-value, constant and trend
    slope_t: np.ndarray  # Newey-West t-statistic of the least-squares slope
    resid_r1: np.ndarray  # lag-1 autocorrelation of the values around that line
    kpss_trend_p: np.ndarray  # KPSS p-value around a trend (clipped to [0.01, 0.10] by its table)
    slow: np.ndarray  # bool: the autocorrelation decays slowly (stationarity.decays_slowly)
    outliers: list  # per row: indices of isolated extreme values (empty list if none or not computed)
    outlier_z: list  # per row: their robust z


def check(x: np.ndarray, r: np.ndarray, persistence_rows: np.ndarray, outlier_rows: np.ndarray) -> Mechanism:
    """Mechanism numbers for complete rows of x (m, n) with autocorrelations r (m, K).

    ``persistence_rows``: rows (indices) that need the unit-root and trend checks; ``outlier_rows``: rows that
    need the outlier check.
    """
    m, n = x.shape
    adf_p = np.full(m, np.nan)
    adf_trend_p = np.full(m, np.nan)
    slope_t = np.full(m, np.nan)
    resid_r1 = np.full(m, np.nan)
    kpss_trend_p = np.full(m, np.nan)
    slow = np.zeros(m, dtype=bool)
    outliers: list = [[] for _ in range(m)]
    outlier_z: list = [[] for _ in range(m)]
    if n >= MIN_N and persistence_rows.size:
        rows = x[persistence_rows]
        adf_p[persistence_rows], adf_trend_p[persistence_rows] = _adf_pair(rows)
        fit = trend.trend_slope(rows)
        slope_t[persistence_rows] = fit.t
        resid_r1[persistence_rows] = fit.resid_r1
        kpss_trend_p[persistence_rows] = trend.kpss_rows(rows, "ct").p_value
        slow[persistence_rows] = stationarity.decays_slowly(r[persistence_rows])
    if n >= 8 and outlier_rows.size:
        level = outlier_flags(x[outlier_rows])
        # Rows with a far value, but not so many that they are the distribution's tails rather than outliers.
        far = level.mask.sum(axis=1)
        hit = np.flatnonzero((far > 0) & (far <= max(1, int(MAX_OUTLIER_SHARE * n))))
        if hit.size:
            rows = x[outlier_rows[hit]]
            steps = np.diff(rows, axis=1)
            big = outlier_flags(steps).mask
            # An isolated value jumps away and back: a far step into it and a far step out of it, of opposite
            # signs (a level shift makes one far step, growth makes many of one sign). At either end of the
            # series only one step exists, and it must be far.
            both = np.zeros(rows.shape, dtype=bool)
            both[:, 1:-1] = big[:, :-1] & big[:, 1:] & (np.sign(steps[:, :-1]) == -np.sign(steps[:, 1:]))
            both[:, 0] = big[:, 0]
            both[:, -1] = big[:, -1]
            isolated = level.mask[hit] & both
            for i, row in enumerate(outlier_rows[hit].tolist()):
                where = np.flatnonzero(isolated[i])
                outliers[row] = where.tolist()
                outlier_z[row] = level.z[hit[i], where].tolist()
    return Mechanism(adf_p, adf_trend_p, slope_t, resid_r1, kpss_trend_p, slow, outliers, outlier_z)


def _adf_pair(rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """ADF p-values with a constant, and with a constant and a trend: both from one QR per row when their lags
    agree (stationarity.adf_pair_rows), the rows it leaves NaN (and short series) by the separate tests."""
    pair = stationarity.adf_pair_rows(rows)
    if pair is None:
        return (np.array([p for _, p, _ in stationarity.adf_rows(rows)]), trend.adf_trend_rows(rows).p_value)
    p_const, t_trend = pair
    p_trend = trend.mackinnon_p_ct(np.where(np.isfinite(t_trend), t_trend, 0.0))
    redo = np.flatnonzero(~(np.isfinite(p_const) & np.isfinite(t_trend)))
    if redo.size:
        p_const[redo] = [p for _, p, _ in stationarity.adf_rows(rows[redo])]
        p_trend[redo] = trend.adf_trend_rows(rows[redo]).p_value
    return p_const, p_trend

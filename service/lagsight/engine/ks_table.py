"""The tabulated Kolmogorov-Smirnov survival function behind the cumulative periodogram p-values.

For 16 < m <= 1000 points the exact survival function P(D_m > d) (``scipy.stats.kstwo.sf``)
costs 20 to 100 ms per m to evaluate on the interpolation grid: paid at run time, a batch of
series of many different lengths spent most of its time there (about 57 of 62 s for 2,000 series
of 805 lengths). The values are therefore computed once, by ``python -m lagsight.engine.ks_table``,
and shipped as ``ks_log_sf.npy``: log P(D_m > d) on :func:`grid` for every m, as float32 (about
2e-6 relative error in P for P >= 1e-12, below the interpolation's 1e-5). The test suite checks
the file against ``kstwo.sf`` (tests/test_statistics_reference.py).
"""
from __future__ import annotations

import sys
from functools import lru_cache
from pathlib import Path

import numpy as np

#: Exact evaluation up to this many points, the table above it and up to TABLE_MAX_POINTS.
EXACT_MAX_POINTS = 16
TABLE_MAX_POINTS = 1000
GRID_POINTS = 239
TABLE_FILE = Path(__file__).with_name("ks_log_sf.npy")
#: Survival values below this are stored as this (log of the smallest normal-range value used).
FLOOR = 1e-300


def grid(m: int) -> np.ndarray:
    """The interpolation points for m: 200 from 1/(2m) to the knee 3.5/sqrt(m), 40 from there to 1."""
    lo = 1.0 / (2 * m)
    knee = min(1.0, 3.5 / np.sqrt(m))
    return np.unique(np.concatenate([np.linspace(lo, knee, 200), np.linspace(knee, 1.0, 40)]))


def exact_log_sf(m: int) -> np.ndarray:
    """log P(D_m > d) on grid(m), exact (scipy.stats.kstwo)."""
    from scipy.stats import kstwo

    return np.log(np.maximum(kstwo.sf(grid(m), m), FLOOR))


@lru_cache(maxsize=1)
def _table() -> np.ndarray:
    table = np.load(TABLE_FILE)
    if table.shape != (TABLE_MAX_POINTS - EXACT_MAX_POINTS, GRID_POINTS):
        raise RuntimeError(f"{TABLE_FILE} has shape {table.shape}; rebuild it: python -m lagsight.engine.ks_table")
    return table


def log_sf(m: int) -> np.ndarray:
    """The shipped log P(D_m > d) on grid(m), as float64, for EXACT_MAX_POINTS < m <= TABLE_MAX_POINTS."""
    if not EXACT_MAX_POINTS < m <= TABLE_MAX_POINTS:
        raise ValueError(f"the table covers {EXACT_MAX_POINTS} < m <= {TABLE_MAX_POINTS}, got {m}")
    return _table()[m - EXACT_MAX_POINTS - 1].astype(np.float64)


def build(workers: int = 2) -> np.ndarray:
    """Compute every row of the table (about a minute on two cores)."""
    from concurrent.futures import ProcessPoolExecutor

    sizes = range(EXACT_MAX_POINTS + 1, TABLE_MAX_POINTS + 1)
    with ProcessPoolExecutor(workers) as pool:
        rows = list(pool.map(exact_log_sf, sizes, chunksize=8))
    if any(row.shape != (GRID_POINTS,) for row in rows):
        raise RuntimeError("grid size changed: update GRID_POINTS")
    return np.stack(rows).astype(np.float32)


def main(argv: list[str] | None = None) -> None:
    argv = sys.argv[1:] if argv is None else argv
    out = Path(argv[0]) if argv else TABLE_FILE
    table = build()
    np.save(out, table)
    print(f"wrote {out}: {table.shape[0]} sizes x {table.shape[1]} points")


if __name__ == "__main__":
    main()

"""Partial autocorrelation by the Durbin-Levinson recursion on the sample ACF.

Notes
-----
With phi_{1,1} = r_1 and, for k >= 2,

    phi_{k,k} = (r_k - sum_{j<k} phi_{k-1,j} r_{k-j}) / (1 - sum_{j<k} phi_{k-1,j} r_j)
    phi_{k,j} = phi_{k-1,j} - phi_{k,k} phi_{k-1,k-j},

the PACF at lag k is phi_{k,k} [1]_, [2]_. Because the biased ACF is positive
semi-definite, every |phi_{k,k}| <= 1 up to rounding. The recursion runs over
lags; each step is vectorised over the series.

Two implementations give every row the same bits: each step is a fixed sequence of
correctly rounded multiplications, subtractions and divisions, and the one sum,
sum_j phi_{k-1,j} r_{k-j}, is accumulated in order j = 1, 2, ... in both (a running
sum, never a pairwise or blocked reduction). Many series take the NumPy version;
a few series, where NumPy's per-call overhead would dominate, take plain Python floats.

References
----------
.. [1] Durbin, J. (1960). The fitting of time-series models. Revue de l'Institut
   International de Statistique 28(3), 233-244.
.. [2] Box, Jenkins, Reinsel and Ljung (2015), Time Series Analysis, 5th ed., section 3.2.5.
"""
from __future__ import annotations

import numpy as np


#: Below this many (series x lags) the plain-float recursion is cheaper than NumPy calls
#: (about 35 ns per multiply-add against about 12 us of calls per lag; benchmarks/).
SCALAR_MAX_WORK = 350
#: From this many series on, the running sum is one multiply-add call per term (less memory
#: traffic than add.accumulate's partial sums); below it, one accumulate call per lag.
ACCUMULATE_BELOW = 1000


def pacf(r: np.ndarray) -> np.ndarray:
    """Partial autocorrelations from autocorrelations.

    Parameters
    ----------
    r : ndarray, shape (m, K)
        r_1..r_K for each series.

    Returns
    -------
    ndarray, shape (m, K)
        phi_{k,k} for k = 1..K. A series whose prediction error variance reaches
        zero (a perfectly predictable pattern) gets +-1 at that lag and 0 after.
    """
    r = np.asarray(r, dtype=np.float64)
    m, K = r.shape
    if m * K <= SCALAR_MAX_WORK:
        return np.array([_pacf_floats(row) for row in r.tolist()], dtype=np.float64).reshape(m, K)
    # Lag-major layout (K, m): each step works on contiguous vectors over the series.
    rt = np.ascontiguousarray(r.T)
    out = np.zeros((K, m))
    phi = np.zeros((K, m))
    out[0] = phi[0] = rt[0]
    err = 1.0 - rt[0] * rt[0]  # normalised prediction error variance
    s, term = np.empty(m), np.empty(m)
    with np.errstate(divide="ignore", invalid="ignore"):
        for k in range(1, K):
            # The running sum in order j = 0..k-1, as in _pacf_floats: for many series one
            # multiply-add per j on long vectors; for fewer, add.accumulate (sequential) in one call.
            if m >= ACCUMULATE_BELOW:
                np.multiply(phi[0], rt[k - 1], out=s)
                for j in range(1, k):
                    s += np.multiply(phi[j], rt[k - 1 - j], out=term)
            else:
                s = np.add.accumulate(phi[:k] * rt[k - 1 :: -1], axis=0)[-1]
            num = rt[k] - s
            kk = np.where(err > 1e-15, num / err, 0.0)
            np.maximum(kk, -1.0, out=kk)
            np.minimum(kk, 1.0, out=kk)
            phi[:k] -= kk * phi[k - 1 :: -1]  # numpy copies the overlapping reversed operand first
            phi[k] = kk
            out[k] = kk
            err *= 1.0 - kk * kk
    return out.T


def _pacf_floats(r: list[float]) -> list[float]:
    """The recursion of :func:`pacf` for one series, step for step in Python floats."""
    phi = [r[0]]
    out = [r[0]]
    err = 1.0 - r[0] * r[0]
    for k in range(1, len(r)):
        s = phi[0] * r[k - 1]
        for j in range(1, k):
            s += phi[j] * r[k - 1 - j]
        num = r[k] - s
        kk = num / err if err > 1e-15 else 0.0
        kk = min(max(kk, -1.0), 1.0)  # NaN stays NaN, as with np.maximum / np.minimum
        phi = [phi[j] - kk * phi[k - 1 - j] for j in range(k)]
        phi.append(kk)
        out.append(kk)
        err = err * (1.0 - kk * kk)
    return out

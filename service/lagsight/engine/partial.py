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
sum, never a pairwise or blocked reduction). Many series take the NumPy version, where
the sum is one reduction over the leading axis of a (terms x series) array: NumPy adds
such rows one after another, element by element (tests/test_engine_rows.py checks the
bits). A few series, where NumPy's per-call overhead would dominate, take plain Python floats.

References
----------
.. [1] Durbin, J. (1960). The fitting of time-series models. Revue de l'Institut
   International de Statistique 28(3), 233-244.
.. [2] Box, Jenkins, Reinsel and Ljung (2015), Time Series Analysis, 5th ed., section 3.2.5.
"""
from __future__ import annotations

import numpy as np

#: Below this many (series x lags) the plain-float recursion is cheaper than NumPy calls: its
#: cost grows as series x lags**2 (about 0.1 us per term), NumPy's as the lags (about 13 us of
#: calls per lag, nearly whatever the number of series); measured on the benchmark machine.
SCALAR_MAX_WORK = 130


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
    out = np.empty((K, m))
    phi = np.zeros((K, m))
    out[0] = phi[0] = rt[0]
    err = 1.0 - rt[0] * rt[0]  # normalised prediction error variance
    terms = np.empty((K, m))
    with np.errstate(divide="ignore", invalid="ignore"):
        for k in range(1, K):
            # The running sum in order j = 0..k-1, as in _pacf_floats: a reduction over the leading
            # axis adds the rows of the terms one after another. With one series that axis would be
            # the only one, and NumPy sums a lone axis pairwise; add.accumulate is sequential.
            t = np.multiply(phi[:k], rt[k - 1 :: -1], out=terms[:k])
            s = np.add.reduce(t, axis=0) if m > 1 else np.add.accumulate(t, axis=0)[-1]
            kk = np.where(err > 1e-15, np.subtract(rt[k], s, out=s) / err, 0.0)
            np.maximum(kk, -1.0, out=kk)
            np.minimum(kk, 1.0, out=kk)
            phi[:k] -= np.multiply(phi[k - 1 :: -1], kk, out=terms[:k])
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

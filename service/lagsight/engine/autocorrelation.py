"""Sample autocovariance and autocorrelation, exact on hard data.

Notes
-----
The estimator is the usual biased one [1]_:

    c_k = (1/n) * sum_{t=1}^{n-k} (x_t - xbar)(x_{t+k} - xbar),    r_k = c_k / c_0.

Accuracy on data with a large mean and a small spread (the NIST StRD NumAcc
sets) comes from three steps: an exact power-of-two rescaling (no rounding,
and no overflow for values near the float64 limit), a two-pass mean (the
second pass removes what rounding left of the first), and products formed
only after centring. Few lags use direct dot products; more lags use a
zero-padded real FFT, which is exact up to rounding for lags below the
padding (see :func:`uses_fft` for the choice).

References
----------
.. [1] Box, G. E. P., Jenkins, G. M., Reinsel, G. C. and Ljung, G. M. (2015).
   Time Series Analysis: Forecasting and Control, 5th ed., Wiley, section 2.1.4.
"""
from __future__ import annotations

import numpy as np
from scipy import fft as sp_fft

#: Per-row cost of the two paths on large batches, in nanoseconds, measured on the benchmark
#: machine (benchmarks/, thousands of rows): direct products cost about DIRECT_NS per value and
#: lag, the FFT pair about FFT_NS per L log2 L of the padded length L.
DIRECT_NS = 0.2
FFT_NS = 1.2

METHODS = ("auto", "direct", "fft")


def uses_fft(n: int, max_lag: int) -> bool:
    """The "auto" choice: the FFT when its estimated per-row cost is below that of direct products.

    The choice depends on the length and the lags only, never on the number of rows, so a
    series gets the same arithmetic (the same last bits) alone or in a batch. Direct products
    win up to about 65 to 75 lags for a few hundred to a few thousand values, about 100 for
    100,000 and 120 for 1,000,000.
    """
    size = sp_fft.next_fast_len(n + max_lag, real=True)
    return DIRECT_NS * n * max_lag > FFT_NS * size * np.log2(size)


def center(x: np.ndarray, rescale: bool = True) -> np.ndarray:
    """Return each row rescaled by an exact power of two and with its mean removed.

    Parameters
    ----------
    x : ndarray, shape (m, n)
        Finite values.
    rescale : bool, default True
        False skips the rescaling for rows known to be of moderate magnitude (for example
        squares of already centred rows); autocorrelations come out the same, bit for bit,
        because a power-of-two scaling is exact.

    Returns
    -------
    ndarray, shape (m, n)
        ``(x - mean) * 2**-e`` per row, where ``2**e`` bounds the row's largest
        magnitude. Autocorrelations are invariant to both operations.
    """
    x = np.asarray(x, dtype=np.float64)
    n = x.shape[1]
    if rescale:
        # max |x| as max(max x, -min x): the same value without a temporary array the size of x
        peak = np.maximum(np.max(x, axis=1, keepdims=True), -np.min(x, axis=1, keepdims=True))
        _, exponent = np.frexp(np.where(peak > 0, peak, 1.0))
        d = np.ldexp(x, -exponent)  # exact: only the exponent changes
        # add.reduce / n is what ndarray.mean computes, without its wrapper's overhead
        d -= np.add.reduce(d, axis=1, keepdims=True) / n  # in place: one working copy of the data
    else:
        d = x - np.add.reduce(x, axis=1, keepdims=True) / n
    d -= np.add.reduce(d, axis=1, keepdims=True) / n  # second pass: removes the first pass's rounding
    return d


def autocovariance(d: np.ndarray, max_lag: int, method: str = "auto") -> np.ndarray:
    """Biased autocovariances c_0..c_max_lag of centred rows.

    Parameters
    ----------
    d : ndarray, shape (m, n)
        Centred rows (see :func:`center`).
    max_lag : int
        Highest lag, ``1 <= max_lag <= n - 1``.
    method : {"auto", "direct", "fft"}, default "auto"
        "auto" chooses by :func:`uses_fft`.

    Returns
    -------
    ndarray, shape (m, max_lag + 1)
    """
    if method not in METHODS:
        raise ValueError(f"method must be one of {METHODS}, got {method!r}")
    m, n = d.shape
    if not 1 <= max_lag <= n - 1:
        raise ValueError(f"max_lag must be between 1 and n - 1 = {n - 1}, got {max_lag}")
    use_fft = method == "fft" or (method == "auto" and uses_fft(n, max_lag))
    if use_fft:
        size = sp_fft.next_fast_len(n + max_lag, real=True)
        spectrum = sp_fft.rfft(d, n=size, axis=1)
        power = spectrum.real**2
        power += spectrum.imag**2
        del spectrum  # free it before the inverse transform allocates its output
        c = sp_fft.irfft(power, n=size, axis=1)[:, : max_lag + 1].copy()
    else:
        # One call for every lag: each row is zero-padded by max_lag values, and lag k is the dot
        # product of the row with the window of the padded row starting at k (the padding adds
        # exact zeros). np.vecdot is a ufunc, so a row gets the same dot products, and the same
        # bits, whatever the number of rows.
        padded = np.zeros((m, n + max_lag))
        padded[:, :n] = d
        # windows[i, k] = padded[i, k:k + n], a read-only strided view (no copy)
        windows = np.ndarray((m, max_lag + 1, n), dtype=np.float64, buffer=padded,
                             strides=(padded.strides[0], padded.strides[1], padded.strides[1]))
        c = np.vecdot(d[:, None, :], windows)
    return c / n


def acf(x: np.ndarray, max_lag: int, method: str = "auto", rescale: bool = True) -> np.ndarray:
    """Sample autocorrelations r_1..r_max_lag of each row.

    Parameters
    ----------
    x : ndarray, shape (m, n)
        Finite, non-constant rows.
    max_lag : int
        Highest lag, ``1 <= max_lag <= n - 1``.
    method : {"auto", "direct", "fft"}, default "auto"
    rescale : bool, default True
        See :func:`center`.

    Returns
    -------
    ndarray, shape (m, max_lag)
        Column ``k - 1`` holds r_k.

    Examples
    --------
    >>> import numpy as np
    >>> acf(np.array([[10000001.0, 10000003.0, 10000002.0]]), 1)
    array([[-0.5]])
    """
    c = autocovariance(center(x, rescale), max_lag, method)
    return c[:, 1:] / c[:, :1]

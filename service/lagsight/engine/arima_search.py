"""The "suggested" model: a start order read off the correlograms, then a small AICc search around it.

Start order (common practice for reading correlograms [1]_, made explicit here; no source gives these
exact thresholds):

- d = 1 when the autocorrelation decays slowly (:func:`lagsight.engine.stationarity.decays_slowly`)
  and the augmented Dickey-Fuller test does not reject a unit root at level alpha; else d = 0.
- On the (differenced) series, with the band z / sqrt(n) at ``confidence``: p is the run of lags
  1, 2, 3 whose partial autocorrelation is outside the band, q the same run for the autocorrelation;
  when both are positive the smaller is kept and the other set to 0 (AR on a tie), parsimony.
- With a seasonal period s reached by the correlogram: P = 1 when r_s is outside the band and
  positive, Q = 1 when it is outside and negative. D = 0: a seasonal unit root is not searched for
  (send a seasonal_order, or the seasonal_difference transform).
- The trend is a constant without differencing, none with it.

Search: the start is fitted, then all its neighbours p +- 1, q +- 1 (each within 0..3) and, with a
period, P +- 1, Q +- 1 (within 0..1), in that order, each order at most once. When the lowest AICc
[2]_ so far belongs to one of them, the search moves there and fits that order's neighbours in turn.
It stops when a round brings no lower AICc, after ``max_fits`` fits, or when the next fit would take
the summed work (:func:`lagsight.engine.arima.cost`) past ``budget``. d, D, s and the trend stay those
of the start (AICc values of different differencing orders are not comparable). Fits that did not
converge, or failed, are listed but never chosen.

References
----------
.. [1] Box, Jenkins, Reinsel and Ljung (2015), Time Series Analysis, 5th ed., section 6.2.
.. [2] Hurvich, C. M. and Tsai, C.-L. (1989). Regression and time series model selection in small
   samples. Biometrika 76, 297-307.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from lagsight.engine.arima import FitError, Fitted, Order, cost, fit
from lagsight.engine.autocorrelation import acf
from lagsight.engine.bands import normal_quantile
from lagsight.engine.partial import pacf
from lagsight.engine.stationarity import adf, decays_slowly

MAX_P = MAX_Q = 3
MAX_SEASONAL = 1
#: Lags read for the start order: at least this many, and the seasonal lag when it is reached.
START_LAGS = 10


def _run(values: np.ndarray, band: float) -> int:
    """How many of the lags 1, 2, 3 in a row are outside +-band."""
    run = 0
    while run < min(3, values.size) and abs(values[run]) > band:
        run += 1
    return run


def _filled(y: np.ndarray) -> np.ndarray:
    """Missing values bridged by straight lines (only to read the start order; the fit skips them)."""
    missing = np.isnan(y)
    if not missing.any():
        return y
    t = np.arange(y.size)
    out = y.copy()
    out[missing] = np.interp(t[missing], t[~missing], y[~missing])
    return out


def start_order(y: np.ndarray, period: int | None, confidence: float) -> Order:
    """The start order for the search (see the module notes). ``y`` is 1-D, NaN where missing."""
    x = _filled(y)  # prepared series have no missing value at either end
    n = x.size
    lags = max(1, min(max(START_LAGS, period or 0), n // 4))
    r = acf(x[None, :], lags)[0]
    alpha = 1.0 - confidence
    d = 0
    if n >= 20 and bool(decays_slowly(r[None, :])[0]) and adf(x)[1] > alpha:
        d = 1
        x = np.diff(x)
        n = x.size
        r = acf(x[None, :], min(lags, n - 1))[0] if np.ptp(x) > 0 else np.zeros(lags)
    band = normal_quantile(confidence) / np.sqrt(n)
    p, q = _run(pacf(r[None, :])[0], band), _run(r, band)
    if p and q:
        p, q = (p, 0) if p <= q else (0, q)
    P = Q = 0
    s = period if period is not None and period <= r.size else 0
    if s:
        rs = r[s - 1]
        P, Q = (1, 0) if rs > band else ((0, 1) if rs < -band else (0, 0))
        if p >= s:  # AR lags would overlap the seasonal ones
            p = s - 1
    return Order(p, d, q, P, 0, Q, s if (P or Q) else 0, "c" if d == 0 else "n")


def _neighbours(o: Order, period: int) -> list[Order]:
    out = []
    for key, step, top in (("p", 1, MAX_P), ("q", 1, MAX_Q), ("p", -1, MAX_P), ("q", -1, MAX_Q)):
        value = getattr(o, key) + step
        if 0 <= value <= top and not (key == "p" and period and value >= period):
            out.append(o.neighbour(**{key: value}))
    if period:
        for key, step in (("P", 1), ("Q", 1), ("P", -1), ("Q", -1)):
            value = getattr(o, key) + step
            if 0 <= value <= MAX_SEASONAL:
                changed = o.neighbour(**{key: value, "s": period})
                out.append(changed if changed.seasonal else changed.neighbour(s=0))
    return out


@dataclass
class Tried:
    order: Order
    fitted: Fitted | None  # None when the fit failed
    failure: str | None = None

    @property
    def eligible(self) -> bool:
        return self.fitted is not None and self.fitted.converged


@dataclass
class Search:
    start: Order
    tried: list[Tried] = field(default_factory=list)
    best: Tried | None = None
    stopped: str = "no_improvement"  # or "fit_limit", "budget"
    spent: int = 0  # work units used (see arima.cost)


def search(y: np.ndarray, start: Order, period: int | None, max_fits: int, budget: int) -> Search:
    """Fit the start order and walk its neighbourhood by AICc (see the module notes)."""
    n = int(np.count_nonzero(~np.isnan(y)))
    out = Search(start)
    seen: set[Order] = set()
    base = period if start.D == 0 and period else 0
    current, batch = start, [start]
    while batch:
        for order in batch:
            if order in seen:
                continue
            if len(out.tried) >= max_fits:
                out.stopped = "fit_limit"
                return out
            if out.spent + cost(order, n) > budget:
                out.stopped = "budget"
                return out
            seen.add(order)
            out.spent += cost(order, n)
            try:
                tried = Tried(order, fit(y, order))
            except FitError as err:
                tried = Tried(order, None, str(err))
            out.tried.append(tried)
            if tried.eligible and (out.best is None or tried.fitted.aicc < out.best.fitted.aicc):
                out.best = tried
        moved = out.best is not None and out.best.order != current
        if batch != [start] and not moved:
            break
        current = out.best.order if out.best is not None else start
        batch = [o for o in _neighbours(current, base) if o not in seen]
    return out

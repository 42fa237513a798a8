"""Seasonal ARIMA fits by statsmodels' SARIMAX, with their residuals and what the optimiser said.

A fit is statsmodels' own: ``SARIMAX(y, order, seasonal_order, trend).fit(disp=False)`` with every
other option at its default (exact likelihood by the Kalman filter, stationarity and invertibility
enforced, L-BFGS with at most 50 iterations), so the parameters are those of a direct call [1]_.
Warnings raised while fitting are caught and returned as ``(kind, message)`` notices instead of
escaping; a fit that fails outright, or leaves a non-finite likelihood or estimate, raises
:class:`FitError`.

The residuals are the standardised one-step-ahead forecast errors after the first
``max(loglikelihood_burn, nobs_diffuse)`` observations (d + D s with differencing, else none),
the same ones statsmodels' own ``test_serial_correlation`` examines [1]_; they are NaN where an
observation is missing (the filter skips it).

The work of one fit grows with the series length n, the state dimension k of the model
(k = d + D s + max(p + P s, q + Q s + 1), the state vector of statsmodels' SARIMAX) and the number of
estimated parameters: each likelihood evaluation runs the Kalman filter (about n k^2 operations, plus
a per-observation overhead that dominates for small k), and each optimiser iteration evaluates it once
per parameter for the gradient, at most 50 iterations. :func:`cost` counts n (k + 4)^2 (terms + 2)
units, terms being the AR, MA and trend coefficients. Measured with one BLAS thread on a busy two-core
machine, fits that ran to the iteration limit took 1.1-1.2 microseconds per unit (orders of 6 to 76
states); most converge well before it.

References
----------
.. [1] statsmodels, ``statsmodels.tsa.statespace.sarimax.SARIMAX`` and ``MLEResults``
   (``aicc``, ``loglikelihood_burn``, ``filter_results.standardized_forecasts_error``,
   ``test_serial_correlation``), version 0.14.
.. [2] Hurvich, C. M. and Tsai, C.-L. (1989). Regression and time series model selection in small
   samples. Biometrika 76, 297-307 (AICc).
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
from statsmodels.tools.sm_exceptions import ConvergenceWarning, HessianInversionWarning
from statsmodels.tsa.statespace.sarimax import SARIMAX

#: Trend names of the service -> statsmodels' trend codes.
TRENDS = {"none": "n", "constant": "c", "linear": "t", "constant_linear": "ct"}
_TREND_NAMES = {code: name for name, code in TRENDS.items()}


class FitError(ValueError):
    """The model could not be fitted (statsmodels refused it, or the likelihood was not finite)."""


@dataclass(frozen=True)
class Order:
    """A seasonal ARIMA order with its trend (statsmodels' trend code)."""

    p: int
    d: int
    q: int
    P: int = 0
    D: int = 0
    Q: int = 0
    s: int = 0
    trend: str = "c"

    @property
    def seasonal(self) -> bool:
        return self.s > 0 and (self.P or self.D or self.Q) > 0

    @property
    def arma_terms(self) -> int:
        """AR and MA coefficients, the degrees of freedom a portmanteau test of the residuals loses."""
        return self.p + self.q + (self.P + self.Q if self.seasonal else 0)

    @property
    def states(self) -> int:
        """The state dimension of statsmodels' SARIMAX for this order."""
        s = self.s if self.seasonal else 0
        return self.d + self.D * s + max(self.p + self.P * s, self.q + self.Q * s + 1)

    @property
    def trend_name(self) -> str:
        return _TREND_NAMES[self.trend]

    def neighbour(self, **changes) -> "Order":
        values = {k: getattr(self, k) for k in ("p", "d", "q", "P", "D", "Q", "s", "trend")}
        values.update(changes)
        return Order(**values)

    def label(self) -> str:
        """ARIMA(p,d,q) or ARIMA(p,d,q)(P,D,Q)[s]."""
        text = f"ARIMA({self.p},{self.d},{self.q})"
        return text + (f"({self.P},{self.D},{self.Q})[{self.s}]" if self.seasonal else "")


def cost(order: Order, n: int) -> int:
    """Work units of one fit: n (k + 4)^2 (terms + 2), k the state dimension (see the module notes)."""
    return n * (order.states + 4) ** 2 * (order.arma_terms + len(order.trend.replace("n", "")) + 2)


@dataclass
class Fitted:
    """One fitted model: estimates, criteria, notices and residuals."""

    order: Order
    names: list[str]  # statsmodels' parameter names, in its order
    estimates: np.ndarray
    standard_errors: np.ndarray  # NaN where the covariance could not be computed
    loglik: float
    aic: float
    aicc: float
    bic: float
    nobs: int  # observed values fitted (the filter skips missing ones)
    converged: bool
    iterations: int | None
    residuals: np.ndarray  # standardised one-step forecast errors after the burn-in
    burn: int
    notices: list[tuple[str, str]] = field(default_factory=list)  # (kind, statsmodels' message)


def _kind(w: warnings.WarningMessage) -> str:
    text = str(w.message).lower()
    if issubclass(w.category, ConvergenceWarning):
        return "not_converged"
    if issubclass(w.category, HessianInversionWarning) or "covariance" in text:
        return "covariance"
    if "starting" in text and "parameters" in text:
        return "start_values"
    if "too few observations" in text:
        return "few_observations"
    if issubclass(w.category, RuntimeWarning):
        return "numerical"
    return "other"


def _notices(caught: list[warnings.WarningMessage]) -> list[tuple[str, str]]:
    out: list[tuple[str, str]] = []
    for w in caught:
        entry = (_kind(w), " ".join(str(w.message).split()))
        if entry not in out:
            out.append(entry)
    return out


def fit(y: np.ndarray, order: Order) -> Fitted:
    """Fit ``order`` to the 1-D series ``y`` (NaN marks a missing observation) by maximum likelihood."""
    seasonal = (order.P, order.D, order.Q, order.s) if order.seasonal else (0, 0, 0, 0)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            model = SARIMAX(y, order=(order.p, order.d, order.q), seasonal_order=seasonal, trend=order.trend)
            res = model.fit(disp=False)
            estimates = np.asarray(res.params, dtype=np.float64)
            errors = np.asarray(res.bse, dtype=np.float64)
            residuals = np.asarray(res.filter_results.standardized_forecasts_error[0], dtype=np.float64)
            burn = max(int(res.loglikelihood_burn), int(res.filter_results.nobs_diffuse))
            criteria = (float(res.llf), float(res.aic), float(res.aicc), float(res.bic))
        except (ValueError, np.linalg.LinAlgError, OverflowError, ZeroDivisionError) as err:
            raise FitError(" ".join(str(err).split()) or type(err).__name__) from None
    if not all(math.isfinite(v) for v in criteria) or not np.isfinite(estimates).all():
        raise FitError("the likelihood or an estimate is not finite")
    retvals = res.mle_retvals or {}
    notices = _notices(caught)
    converged = bool(retvals.get("converged", True)) and not any(k == "not_converged" for k, _ in notices)
    errors = np.where(np.isfinite(errors), errors, np.nan)
    missing = np.isnan(y)
    residuals = np.where(missing, np.nan, residuals)  # the filter reports 0 where it skipped an observation
    iterations = retvals.get("iterations")
    return Fitted(order, list(res.model.param_names), estimates, errors, *criteria,
                  int(y.size - np.count_nonzero(missing)), converged, None if iterations is None else int(iterations),
                  residuals[burn:], burn, notices)


_TERMS = {"intercept": "constant", "drift": "linear_trend", "sigma2": "variance", "ar": "ar", "ma": "ma",
          "ar.S": "seasonal_ar", "ma.S": "seasonal_ma"}


def term(name: str) -> tuple[str, int | None]:
    """statsmodels' parameter name -> (term, lag): "ar.L2" -> ("ar", 2), "ma.S.L12" -> ("seasonal_ma", 12),
    "intercept" -> ("constant", None); an unknown name is kept as the term."""
    head, _, lag = name.rpartition(".L")
    if head in _TERMS and lag.isdigit():
        return _TERMS[head], int(lag)
    return _TERMS.get(name, name), None

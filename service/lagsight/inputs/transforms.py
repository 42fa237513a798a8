"""Transforms applied before the analysis, in one stated order.

Order (``options.TRANSFORM_ORDER``): ``log`` -> ``box_cox`` -> ``difference`` (order d)
-> ``seasonal_difference`` (order D at the period m) -> ``detrend`` (linear).

- log: natural logarithm; every observed value must be > 0.
- box_cox: (x**lambda - 1) / lambda, log x at lambda = 0 [1]_ (``scipy.special.boxcox``);
  lambda is the request's number, or with ``"estimate"`` the maximum-likelihood value
  (``scipy.stats.boxcox_normmax(method="mle")``) on the observed values. Values must be > 0.
  log and box_cox exclude each other (log is box_cox at lambda 0).
- difference: x_t - x_{t-1}, d times; each pass drops the first point.
- seasonal_difference: x_t - x_{t-m}, D times; each pass drops the first m points.
- detrend: the least-squares straight line in time is subtracted (fitted on the
  observed points when some are missing).

Missing values (NaN, kept by ``missing = pairwise``) propagate: a difference is
missing when either of its terms is. Problems point into the ``transform`` object.

References
----------
.. [1] Box, G. E. P. and Cox, D. R. (1964). An analysis of transformations.
   JRSS B 26(2), 211-252.
"""
from __future__ import annotations

import warnings

import numpy as np
from scipy import optimize, special, stats

from lagsight import options
from lagsight.problems import counted, invalid


def _step(name: str, *, order=None, lag=None, lambda_=None, lambda_source=None, n_after: int) -> dict:
    return {"step": name, "order": order, "lag": lag, "lambda": lambda_, "lambda_source": lambda_source,
            "n_after": n_after}


def _observed(x: np.ndarray) -> int:
    return int(np.count_nonzero(~np.isnan(x)))


def _require_positive(x: np.ndarray, what: str, pointer: str) -> None:
    bad = ~(x > 0) & ~np.isnan(x)
    if bad.any():
        i = int(np.argmax(bad))
        raise invalid(pointer, f"{what} needs every value to be positive; {int(bad.sum())} are not, the first "
                               f"at position {i} of the series ({x[i]:g}).")


def linear_detrend(x: np.ndarray) -> np.ndarray:
    """Subtract the least-squares line a + b t, fitted on the observed (non-NaN) points.

    The fit runs on the values rescaled by an exact power of two, so values near the
    float64 limit do not overflow in the sums.
    """
    t = np.arange(x.size, dtype=np.float64)
    ok = ~np.isnan(x)
    peak = float(np.max(np.abs(x[ok])))
    _, exponent = np.frexp(peak if peak > 0 else 1.0)
    y = np.ldexp(x, -int(exponent))
    tc = t[ok] - t[ok].mean()
    yc = y[ok] - y[ok].mean()
    slope = float(tc @ yc / (tc @ tc))
    return np.ldexp(y - (y[ok].mean() + slope * (t - t[ok].mean())), int(exponent))


def _box_cox_llf(lam: float, logx: np.ndarray, sum_logx: float) -> float:
    """The Box-Cox profile log-likelihood (scipy.stats.boxcox_llf), for positive values given as logs.

    llf = (lambda - 1) sum log x - n/2 log var(y), y the transformed values. The variance is taken
    of exp(lambda log x - max) and scaled back in logs, as scipy does with log-sum-exp, so large
    |lambda| neither overflows nor loses the spread to the constant offset of the transform.
    """
    n = logx.size
    if lam == 0.0:
        d = logx - logx.mean()
        return -sum_logx - 0.5 * n * np.log(d @ d / n)
    u = lam * logx
    top = u.max()
    v = np.exp(u - top)
    d = v - v.mean()
    return (lam - 1.0) * sum_logx - 0.5 * n * (2.0 * top + np.log(d @ d / n) - 2.0 * np.log(abs(lam)))


def box_cox_lambda(obs: np.ndarray) -> float:
    """The maximum-likelihood Box-Cox lambda of positive values, as scipy.stats.boxcox_normmax(method="mle").

    The same optimiser from the same bracket (Brent, (-2, 2)) on the same log-likelihood, evaluated
    without scipy's per-call overhead (about 0.4 ms a call, 28 calls a series: a batch of thousands
    of series asking for an estimate spent most of its time there). When the optimum would overflow
    the transformed values, scipy's own routine gives its constrained lambda.
    """
    logx = np.log(obs)
    sum_logx = float(logx.sum())
    with np.errstate(divide="ignore"):  # a variance of 0 (a degenerate lambda) is -inf in logs, never the optimum
        lam = float(optimize.brent(lambda value: -_box_cox_llf(value, logx, sum_logx), brack=(-2.0, 2.0)))
    top = max(abs(float(special.boxcox(obs.max(), lam))), abs(float(special.boxcox(obs.min(), lam))))
    if np.isfinite(top) and top <= np.finfo(np.float64).max / 10000:  # scipy's own limit (ymax)
        return lam
    with warnings.catch_warnings():  # scipy warns when it keeps lambda within the float range
        warnings.simplefilter("ignore", UserWarning)
        return float(stats.boxcox_normmax(obs, method="mle"))


def _varies(x: np.ndarray) -> bool:
    """The observed (non-NaN) values are not all equal."""
    seen = x[~np.isnan(x)]
    return seen.size > 0 and bool(seen.min() != seen.max())


def rounding_only(after: np.ndarray, before: np.ndarray) -> bool:
    """True when transformed values vary only at the level of rounding error of the values they came
    from (for example a straight line, differenced): their spread is below 1e-12 of the largest value."""
    scale = float(np.nanmax(np.abs(before)))
    return float(np.nanmax(after)) - float(np.nanmin(after)) <= 1e-12 * scale


def _check_finite(x: np.ndarray, what: str, pointer: str) -> None:
    """NaN marks a missing value; an infinity means a step overflowed the float64 range."""
    bad = np.isinf(x)
    if bad.any():
        i = int(np.argmax(bad))
        raise invalid(pointer, f"{what} overflows the floating-point range (first at position {i} of the "
                               "transformed series); rescale the values before sending them.")


def apply(x: np.ndarray, spec: dict | None, period: int | None, pointer: str = "/transform"):
    """Apply the requested transforms to one series.

    Parameters
    ----------
    x : ndarray, shape (n,)
        Values, NaN where missing.
    spec : dict or None
        The validated ``transform`` object.
    period : int or None
        Seasonal period, required by ``seasonal_difference``.
    pointer : str
        JSON pointer of the transform object, for problems.

    Returns
    -------
    y : ndarray
        The transformed series (shorter after differencing).
    steps : list of dict
        What was applied, in order, with the resulting number of points.
    dropped : int
        Points removed from the front by differencing.
    """
    spec = spec or {}
    steps: list[dict] = []
    dropped = 0
    if spec.get("log") and spec.get("box_cox") is not None:
        raise invalid(f"{pointer}/box_cox", "Choose log or box_cox, not both (log is box_cox with lambda 0).")
    if spec.get("log"):
        _require_positive(x, "The log transform", f"{pointer}/log")
        x = np.log(x)
        steps.append(_step("log", n_after=_observed(x)))
    lam = spec.get("box_cox")
    if lam is not None:
        _require_positive(x, "The Box-Cox transform", f"{pointer}/box_cox")
        source = "request"
        if lam == options.BOX_COX_ESTIMATE:
            obs = x[~np.isnan(x)]
            if obs.size < 2 or obs.min() == obs.max():
                raise invalid(f"{pointer}/box_cox", "Cannot estimate lambda for a constant series or from fewer "
                                                    "than two observed values.")
            lam, source = box_cox_lambda(obs), "estimated"
        before = x
        with np.errstate(over="ignore"):
            x = special.boxcox(x, lam)
        _check_finite(x, "The Box-Cox transform", f"{pointer}/box_cox")
        if _varies(before) and rounding_only(x, before):
            raise invalid(f"{pointer}/box_cox", f"The series is constant after the Box-Cox transform with lambda "
                          f"{lam:.4g} ({source}): it left the variation only at rounding level, and autocorrelation "
                          "is undefined without variation. Values that vary little relative to their level can make "
                          "an estimated lambda extreme. Send a lambda (0 is the log), or leave the Box-Cox transform out.")
        steps.append(_step("box_cox", lambda_=float(lam), lambda_source=source, n_after=_observed(x)))
    d = spec.get("difference") or 0
    for _ in range(d):
        if x.size - 1 < options.MIN_POINTS:
            raise invalid(f"{pointer}/difference", f"Differencing {counted(d, 'time', 'times')} leaves fewer than "
                                                        f"{options.MIN_POINTS} points.")
        with np.errstate(over="ignore", invalid="ignore"):
            x = x[1:] - x[:-1]
        _check_finite(x, "Differencing", f"{pointer}/difference")
        dropped += 1
    if d:
        steps.append(_step("difference", order=d, lag=1, n_after=_observed(x)))
    D = spec.get("seasonal_difference") or 0
    if D:
        if period is None:
            raise invalid(f"{pointer}/seasonal_difference", "A seasonal difference needs a period: send period, "
                                                            "or timestamps whose regular spacing implies one.")
        for _ in range(D):
            if x.size - period < options.MIN_POINTS:
                raise invalid(f"{pointer}/seasonal_difference",
                              f"Seasonal differencing (order {D} at period {period}) leaves fewer than "
                              f"{options.MIN_POINTS} points of the {x.size + dropped} sent.")
            with np.errstate(over="ignore", invalid="ignore"):
                x = x[period:] - x[:-period]
            _check_finite(x, "Seasonal differencing", f"{pointer}/seasonal_difference")
            dropped += period
        steps.append(_step("seasonal_difference", order=D, lag=period, n_after=_observed(x)))
    if spec.get("detrend"):
        if _observed(x) < options.MIN_POINTS:
            raise invalid(f"{pointer}/detrend", f"Too few points left to fit a line ({_observed(x)}).")
        with np.errstate(over="ignore", invalid="ignore"):
            x = linear_detrend(x)
        _check_finite(x, "Detrending", f"{pointer}/detrend")
        steps.append(_step("detrend", n_after=_observed(x)))
    if steps and _observed(x) < options.MIN_POINTS:
        raise invalid(pointer, f"The transforms leave {_observed(x)} observed points; at least {options.MIN_POINTS} are needed.")
    return x, steps, dropped

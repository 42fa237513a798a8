"""Defaults, allowed values and limits of the request options: said once, here.

The marshmallow schemas, GET /v1/methods and the tests read these names; a
test checks that openapi/openapi.yaml states the same values.
"""
from __future__ import annotations

import math

DEFAULT_CONFIDENCE = 0.95
DEFAULT_MODEL_DF = 0
MIN_POINTS = 3  # the smallest series with a defined lag-1 autocorrelation (NIST NumAcc1 has 3)
MIN_PERIOD = 2
MAX_ID_LENGTH = 200  # characters of a batch series id

# Limits that the deployment may lower or raise (see config.py); these are the defaults.
DEFAULT_LIMITS = {
    "max_points": 2_000_000,  # usable points in one series
    "max_lag": 2_000,  # highest lag a request may ask for
    "max_body_bytes": 64 * 1024 * 1024,  # request body size
    "max_series": 20_000,  # series in one batch request
    "max_batch_points": 5_000_000,  # values in one batch request, all series together
    "max_replicates": 10_000,  # Monte Carlo replicates one request may ask for
}


def default_max_lag(n: int, period: int | None) -> int:
    """Default highest lag: min(max(floor(10 log10 n), 2 m), n - 1).

    ``floor(10 log10 n)`` is common practice (the default number of lags of
    ``statsmodels.tsa.stattools.acf``); with a seasonal period m we reach at
    least lag 2m so that two seasonal lags are shown (common practice, no source).
    """
    lag = int(math.floor(10.0 * math.log10(n)))
    if period is not None:
        lag = max(lag, 2 * period)
    return max(1, min(lag, n - 1))


def portmanteau_lags(n: int, max_lag: int, period: int | None, model_df: int) -> list[int]:
    """Lags at which the portmanteau tests are reported.

    - a short lag h = min(10, n // 5) without a period, min(2 m, n // 5) with one
      (a widely taught rule of thumb, recalled from forecasting textbooks; no
      source checked here), raised to model_df + 1 so it has degrees of freedom
      and kept within max_lag;
    - the seasonal lags m and 2 m when a period is known and they are within max_lag;
    - max_lag itself.
    """
    short = min(10 if period is None else 2 * period, max(1, n // 5))
    short = min(max(short, model_df + 1), max_lag)
    lags = {short, max_lag}
    if period is not None:
        lags.update(h for h in (period, 2 * period) if h <= max_lag)
    return sorted(lags)


# --- data in: missing values, timestamps, transforms -------------------------------------------

#: How missing observations (null values, or slots skipped by regular timestamps) are handled.
MISSING_METHODS = ("refuse", "interpolate", "pairwise")
DEFAULT_MISSING = "refuse"

#: A regular grid with gaps is accepted when at least this share of its slots is observed;
#: sparser timestamps are treated as irregular (common practice, no source).
MIN_OBSERVED_SHARE = 0.5

#: A lag is analysed with missing data only when at least this many complete pairs span it.
MIN_PAIRS = 3

#: Regular spacing -> (name, seasonal period). The period is the cycle one looks for first
#: (common practice, no source): a day of hours, a week of days, a year of weeks, months or quarters.
PERIOD_BY_SPACING = {
    "hourly": 24,
    "daily": 7,
    "business-daily": 5,
    "weekly": 52,
    "monthly": 12,
    "quarterly": 4,
    "yearly": None,
}

#: Transform steps, in the order they are applied.
TRANSFORM_ORDER = ("log", "box_cox", "difference", "seasonal_difference", "detrend")
BOX_COX_ESTIMATE = "estimate"
MAX_BOX_COX_LAMBDA = 5.0  # |lambda| beyond this is refused (common practice, no source: useful lambdas lie in [-2, 2])
MAX_DIFFERENCE = 3  # order d of differencing
MAX_SEASONAL_DIFFERENCE = 2  # order D of seasonal differencing
DETREND_KINDS = ("linear",)

# --- data out ------------------------------------------------------------------------------------

#: Response formats (query parameter ``format``) and the media types that select them via Accept.
FORMATS = {"json": "application/json", "csv": "text/csv", "svg": "image/svg+xml", "png": "image/png"}
DEFAULT_FORMAT = "json"
#: Charts that format=svg/png can draw (query parameter ``chart``).
CHART_KINDS = ("correlogram", "pacf", "time_plot", "periodogram", "panel")
DEFAULT_CHART = "correlogram"
#: A spike beyond this many standard errors is "far" outside the band; between the band and it, "marginal".
FAR_OUTSIDE_SE = 3.0

# --- CSV bodies ----------------------------------------------------------------------------------

CSV_DELIMITERS = {"comma": ",", "semicolon": ";", "tab": "\t"}
CSV_DECIMALS = {"point": ".", "comma": ","}
CSV_MISSING_TOKENS = ("", "na", "n/a", "nan", "null", "none", "#n/a", "-")

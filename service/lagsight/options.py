"""Defaults, allowed values and limits of the request options: said once, here.

The marshmallow schemas, GET /v1/methods and the tests read these names; a
test checks that openapi/openapi.yaml states the same values.
"""
from __future__ import annotations

import math

from lagsight.engine.analysis import TEST_NAMES as _TEST_NAMES
from lagsight.engine.bands import BAND_KINDS as _BAND_KINDS

DEFAULT_CONFIDENCE = 0.95
DEFAULT_MODEL_DF = 0
#: The values are h-step-ahead forecast errors (option ``horizon``): lags 1..h - 1 are not tested.
DEFAULT_HORIZON = 1
MIN_HORIZON = 1
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
    "max_replicates": 9_999,  # Monte Carlo replicates one request may ask for
    "max_simulated_values": 50_000_000,  # Monte Carlo replicates x n per request
    "max_cost": 20_000,  # estimated work per request, in cost units (web/budget.py)
}


def default_max_lag(n: int, period: int | None) -> int:
    """Default highest lag: min(max(floor(10 log10 n), s), n - 1).

    ``floor(10 log10 n)`` is common practice (the default number of lags of
    ``statsmodels.tsa.stattools.acf``). With a seasonal period m, s is 2m when
    2m <= n/2, else m when m <= n/2, so that the seasonal lags are shown without
    reaching lags where too few pairs of values remain (common practice, no source);
    without a period, or when m > n/2, s is 0.
    """
    lag = int(math.floor(10.0 * math.log10(n)))
    if period is not None:
        reach = next((k * period for k in (2, 1) if k * period <= n // 2), 0)
        lag = max(lag, reach)
    return max(1, min(lag, n - 1))


def short_lag(n: int, max_lag: int, period: int | None) -> int:
    """The short lag h = min(10, n // 5), or min(2 m, n // 5) with a period m, within max_lag.

    A widely taught rule of thumb for portmanteau lags, recalled from forecasting
    textbooks (no source checked here). It is also the McLeod-Li lag.
    """
    return max(1, min(10 if period is None else 2 * period, n // 5, max_lag))


def portmanteau_lags(n: int, max_lag: int, period: int | None, model_df: int, horizon: int = 1) -> list[int]:
    """Lags at which the portmanteau tests are reported.

    - the short lag min(10, n // 5), or min(2 m, n // 5) with a period m, raised to model_df + 1 so it has
      degrees of freedom and kept within max_lag (see :func:`short_lag`); with a horizon h the sums start at
      lag h, so the short lag is moved up by h - 1 and raised to model_df + h;
    - the seasonal lags m and 2 m when a period is known and they are within horizon..max_lag;
    - max_lag itself.
    """
    short = min(max(short_lag(n, max_lag, period) + horizon - 1, model_df + horizon), max_lag)
    lags = {short, max_lag}
    if period is not None:
        lags.update(h for h in (period, 2 * period) if horizon <= h <= max_lag)
    return sorted(lags)


# Analysis choices: the engine's names (the schema and the OpenAPI file list the same).
BAND_KINDS = _BAND_KINDS
DEFAULT_BAND = "white_noise"
TEST_NAMES = _TEST_NAMES
DEFAULT_TESTS = TEST_NAMES
P_VALUE_METHODS = ("asymptotic", "monte_carlo")
DEFAULT_P_VALUES = "asymptotic"
DEFAULT_REPLICATES = 999
MIN_REPLICATES = 99
#: Below this length the chi-square p-values are noticeably off (simulated: Ljung-Box at
#: n = 30 rejects about 7.4% of i.i.d. series at the 5% level); a warning suggests Monte Carlo.
SMALL_SAMPLE_N = 50
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
#: How much of each series' result a batch answers (batch option ``detail``): "full", the whole report of
#: the single route; "brief", the verdict, the test numbers, the exceedances, the seasonal strength and the
#: warnings, with the general cautions once for the whole batch (see lagsight.outputs.brief).
DETAIL_LEVELS = ("full", "brief")
DEFAULT_DETAIL = "full"
#: Significant digits of the numbers written (option ``digits``; null writes every float at full precision, the
#: 17 digits that read back as the same double). The default keeps a relative rounding error of at most
#: 5e-13 (half a unit in the 13th digit), inside every tolerance at which the service's tests check answers
#: against references (the tightest relative one is 1e-12, the pairwise band against z / sqrt(n_k) in
#: tests/test_missing.py), and writes about a fifth fewer characters than full precision.
DEFAULT_DIGITS = 13
MIN_DIGITS, MAX_DIGITS = 1, 17
#: Chart data (option ``charts``): off by default. The report's own blocks (acf, pacf, periodogram) hold the
#: correlogram and periodogram numbers; ``charts: true`` adds the chart-ready tables (the time plot included).
DEFAULT_CHARTS = False
#: A spike beyond this many standard errors is "far" outside the band; between the band and it, "marginal".
FAR_OUTSIDE_SE = 3.0

# --- CSV bodies ----------------------------------------------------------------------------------

CSV_DELIMITERS = {"comma": ",", "semicolon": ";", "tab": "\t"}
CSV_DECIMALS = {"point": ".", "comma": ","}
CSV_MISSING_TOKENS = ("", "na", "n/a", "nan", "null", "none", "#n/a", "-")

# --- after the verdict: checking a model ---------------------------------------------------------

#: POST /v1/model-check: ``order`` is [p, d, q] within these bounds, or "suggested".
MODEL_SUGGESTED = "suggested"
MODEL_MAX_ORDER = (5, 2, 5)  # p, d, q
MODEL_MAX_SEASONAL_ORDER = (2, 1, 2)  # P, D, Q
MODEL_TRENDS = ("none", "constant", "linear", "constant_linear")
#: The suggested model's AICc search fits at most this many orders (the start included).
MODEL_SEARCH_FITS = 8
#: Work one request may spend on fits, in units of n (k + 4)^2 (terms + 2) per fit (k the model's state dimension,
#: terms its AR, MA and trend coefficients; see lagsight.engine.arima.cost). Fits of about 15,000,000 units that
#: ran to statsmodels' iteration limit took 16-18 s (1.1-1.2 microseconds a unit; one BLAS thread, a busy two-core
#: machine; seasonal and non-seasonal orders of 6 to 76 states), inside the 60-second worker timeout; most fits
#: converge in a fraction of the limit.
MODEL_WORK_BUDGET = 15_000_000

# --- after the verdict: stability over time ------------------------------------------------------

#: POST /v1/stability: the shortest window (common practice, no source: below about 20 values a window's
#: autocorrelations are too noisy to compare), and the most windows one request may diagnose.
STABILITY_MIN_WINDOW = 20
STABILITY_MAX_WINDOWS = 2_000

# --- after the verdict: checking a driver ---------------------------------------------------------

#: POST /v1/driver-check: at most this many drivers per request; at least this many paired values
#: (common practice, no source: fewer leave the cross-correlations too noisy to read).
DRIVER_MAX = 10
DRIVER_MIN_POINTS = 20
#: Cross-correlation lags -K..K: K = min(DRIVER_DEFAULT_LAG, n // 5) unless max_lag is sent (at most n // 4).
DRIVER_DEFAULT_LAG = 10
#: Highest AR order tried for prewhitening: min(DRIVER_MAX_AR_ORDER, n // 10).
DRIVER_MAX_AR_ORDER = 10

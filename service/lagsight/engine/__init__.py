"""The numerical core: pure numpy/scipy/statsmodels, vectorised over many series.

Imports nothing of lagsight outside engine/ (no options, no problems, no Flask): callers validate, the engine trusts.

Every function takes a 2-D float array ``x`` of shape ``(m, n)`` (m series of
length n, rows already validated: finite, non-constant, n >= 3) and returns
arrays with a leading axis of length m. A single series is a batch of one.
"""
from lagsight.engine.analysis import TEST_NAMES, GroupAnalysis, Spec, analyse
from lagsight.engine.autocorrelation import acf, autocovariance, center
from lagsight.engine.bands import BAND_KINDS, acf_band, normal_quantile, pacf_band
from lagsight.engine.partial import pacf
from lagsight.engine.portmanteau import PORTMANTEAU_TESTS, portmanteau

__all__ = [
    "BAND_KINDS",
    "GroupAnalysis",
    "Spec",
    "TEST_NAMES",
    "acf",
    "acf_band",
    "analyse",
    "pacf_band",
    "autocovariance",
    "center",
    "normal_quantile",
    "pacf",
    "portmanteau",
    "PORTMANTEAU_TESTS",
]

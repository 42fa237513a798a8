"""Service description: health, the methods catalogue and the OpenAPI document."""
from __future__ import annotations

import re

from flask import Blueprint, current_app

from lagsight import options
from lagsight.consult import across, advice
from lagsight.consult.decision import __doc__ as DECISION_RULE
from lagsight.consult.words import MEANINGS
from lagsight.engine import changepoints, stl, whiteness
from lagsight.engine.crosscorrelation import __doc__ as driver_doc
from lagsight.engine.masked import __doc__ as masked_doc
from lagsight.engine.portmanteau import PORTMANTEAU_TESTS
from lagsight.inputs.csv_input import __doc__ as csv_doc
from lagsight.inputs.numbers import __doc__ as numbers_doc
from lagsight.inputs.schema import BATCH_OVERRIDES
from lagsight.inputs.timestamps import __doc__ as timestamps_doc
from lagsight.inputs.transforms import __doc__ as transforms_doc
from lagsight.outputs.brief import FIELDS as BRIEF_FIELDS
from lagsight.outputs.charts import MAX_TIME_POINTS
from lagsight.outputs.charts import __doc__ as charts_doc
from lagsight.outputs.csv_table import COLUMNS as CSV_COLUMNS
from lagsight.version import __version__
from lagsight.web import budget, query
from lagsight.web.responses import json_response

bp = Blueprint("meta", __name__)


def _number(name: str, constants: dict) -> str | None:
    value = constants.get(name, getattr(options, name, None))
    if isinstance(value, str):
        return value
    if isinstance(value, int) and not isinstance(value, bool):
        return f"{value:,}"
    return f"{value:,g}" if isinstance(value, float) else None


def _sources(doc: str) -> dict[str, str]:
    """A docstring's numbered references as short citations: "[2]" -> "Haugh 1976"."""
    found = {}
    for number, authors, year in re.findall(r"^\.\. \[(\d+)\] (.+?)\s*\((\d{4})\)", doc, re.M):
        found[number] = re.sub(r",?(?: [A-Z]\.)+", "", authors).strip(" ,") + f" {year}"
    return found


def _citations(text: str, doc: str) -> str:
    """Citation marks ([1]_, [2]_) as the works they point to: "(Parzen 1963; Dunsmuir and Robinson 1981)",
    without the brackets inside parentheses or after "from"; marks with no reference list are dropped."""
    sources = _sources(doc)

    def cite(m: re.Match) -> str:
        works = "; ".join(sources[n] for n in re.findall(r"\[(\d+)\]_", m.group(0)) if n in sources)
        before = text[:m.start()]
        if not works:
            return m.group(2) or ""
        if re.search(r"(?:\(|,|\bfrom)$", before):
            return m.group(1) + works + (m.group(2) or "")
        if m.group(2):  # a parenthesis right after: one pair of them
            return f"{m.group(1)}({works}; "
        return f"{m.group(1)}({works})"

    return re.sub(r"(\s*)\[\d+\]_(?:,\s*\[\d+\]_)*( \()?", cite, text)


def _prose(text: str, doc: str = "", **constants) -> str:
    """A docstring section as one line of plain words: no cross-reference markup, citation marks as the works
    cited (from ``doc``'s references), no pointers into the source, Python operators as formulas, and a
    constant named in the source (``options.MIN_OBSERVED_SHARE``, or one of ``constants``) given as its value."""
    def value(m: re.Match) -> str:
        number = _number(m.group(1) or m.group(2) or m.group(4), constants)
        if number is None:
            return m.group(0)
        return number + (m.group(3) if m.group(3) and m.group(3) != f" ({number})" else "")

    names = "|".join(sorted((c for c in constants if c.isupper()), key=len, reverse=True)) or "(?!)"  # bare: capitals
    text = re.sub(rf"(?:``(?:options\.)?([A-Za-z][A-Za-z0-9_]+)``|options\.([A-Z][A-Z0-9_]+))( \([^)]*\))?"
                  rf"|\b({names})\b(?!\()", value, text)
    text = re.sub(r"\s*\((?:see\s+)?:[a-z]+:`[^`]+`\)", "", text)  # a pointer into the source, not a word
    text = re.sub(r"\s*\(see (?:``[\w.]+``|[\w/]+\.py)\)|,?\s*see (?:``[\w.]+``|[\w/]+\.py)", "", text)
    text = re.sub(r"(?m)^(\S[^\n]*)\n-{3,}\n", r"\1: ", text)  # a section heading, underlined
    text = re.sub(r"\s*\(``(?:options|lagsight)\.[\w.]+``\)|\s*\(``[\w/]+\.py``\)", "", text)
    text = re.sub(r":[a-z]+:`~?\.?([^`]+)`", r"\1", text)
    text = _citations(text, doc)
    text = re.sub(r"\b(\w+) // (\w+)", r"floor(\1 / \2)", text)  # Python's operators, written as formulas
    text = re.sub(r"(\w)\*\*(\w)", r"\1^\2", text)
    return " ".join(text.replace("``", "").split())


@bp.get("/healthz")
def healthz():
    """Say the process is alive."""
    return json_response({"status": "ok", "version": __version__})


@bp.get("/openapi.json")
def openapi():
    """Serve the OpenAPI document (openapi/openapi.yaml) as JSON."""
    return json_response(current_app.extensions["lagsight.spec"])


@bp.get("/v1/methods")
def methods():
    """List analyses, options with defaults, limits and the decision rule."""
    cfg = current_app.config
    return json_response({
        "version": __version__,
        "analyses": [
            {"name": "acf", "description": "Sample autocorrelation r_k = c_k / c_0 with the biased autocovariance (divide by n)."},
            {"name": "pacf", "description": "Partial autocorrelation by the Durbin-Levinson recursion on the sample autocorrelation."},
            {"name": "ljung_box", "description": "Ljung-Box portmanteau test, Q = n(n+2) sum r_k^2/(n-k), chi-square on lag - model_df df."},
            {"name": "box_pierce", "description": "Box-Pierce portmanteau test, Q = n sum r_k^2, chi-square on lag - model_df df."},
            {"name": "seasonal", "description": "Autocorrelations at the period m and its multiples 2m, 3m within max_lag; "
                                                f"seasonal strength from STL (periods up to {stl.MAX_PERIOD:,}, series with a "
                                                "seasonal lag outside the band); a suggested period when none is known."},
            {"name": "periodogram", "description": "Periodogram at the Fourier frequencies and its normalised cumulative sum."},
            {"name": "unit_root", "description": "Augmented Dickey-Fuller test, run when the ACF decays slowly, to back advice to difference."},
        ],
        "test_catalogue": [{"name": name, "meaning": MEANINGS[name].format(lag="h")} for name in options.TEST_NAMES],
        "tests": list(PORTMANTEAU_TESTS),
        "options": {
            "max_lag": {"default": "min(max(floor(10 log10 n), s), n - 1) with s = 2 * period if that is at most n/2, else period if that is, else 0", "minimum": 1, "maximum": cfg["MAX_LAG"]},
            "confidence": {"default": options.DEFAULT_CONFIDENCE, "exclusive_minimum": 0, "exclusive_maximum": 1},
            "model_df": {"default": options.DEFAULT_MODEL_DF, "minimum": 0},
            "horizon": {"default": options.DEFAULT_HORIZON, "minimum": options.MIN_HORIZON,
                        "description": "h-step forecast errors: lags 1 to h - 1 are not tested; from lag h on the "
                                       "variance is Bartlett's (1 + 2 sum_{j<h} r_j^2)/n and the sums start at lag h"},
            "period": {"default": None, "minimum": options.MIN_PERIOD},
            "band": {"default": options.DEFAULT_BAND, "enum": list(options.BAND_KINDS)},
            "tests": {"default": list(options.DEFAULT_TESTS), "enum": list(options.TEST_NAMES)},
            "p_values": {"default": options.DEFAULT_P_VALUES, "enum": list(options.P_VALUE_METHODS)},
            "replicates": {"default": options.DEFAULT_REPLICATES, "minimum": options.MIN_REPLICATES,
                           "maximum": cfg["MAX_REPLICATES"]},
            "seed": {"default": None, "minimum": 0},
            "missing": {"default": options.DEFAULT_MISSING, "enum": list(options.MISSING_METHODS),
                        "pairwise": _prose(masked_doc.split("Notes\n-----")[1].split("References")[0], masked_doc)},
            "transform": {"order": list(options.TRANSFORM_ORDER),
                          "rules": _prose(transforms_doc.split("Missing values")[0].split("\n\n", 1)[1], transforms_doc)},
        },
        "small_sample_threshold": {"n": options.SMALL_SAMPLE_N, "why": (
            "Below this length the chi-square p-values drift from their nominal level (simulated here: the 5% "
            "Ljung-Box test at lag 10 rejects about 7% of i.i.d. series of length 30); reports warn and advise "
            "Monte Carlo p-values.")},
        "timestamps": {"periods": dict(options.PERIOD_BY_SPACING),
                       "rules": _prose(timestamps_doc.split("----------------------------------------------------------")[1])},
        "portmanteau_lags": _prose(options.portmanteau_lags.__doc__),
        "limits": {"min_points": options.MIN_POINTS, "max_points": cfg["MAX_POINTS"], "max_lag": cfg["MAX_LAG"],
                   "max_body_bytes": cfg["MAX_CONTENT_LENGTH"], "max_series": cfg["MAX_SERIES"],
                   "max_batch_points": cfg["MAX_BATCH_POINTS"], "max_replicates": cfg["MAX_REPLICATES"],
                   "max_simulated_values": cfg["MAX_SIMULATED_VALUES"], "max_cost": cfg["MAX_COST"],
                   "request_deadline_seconds": cfg["REQUEST_DEADLINE"],
                   "cost": _prose(budget.__doc__.split("Cost\n----")[1].split("Deadline\n--------")[0]),
                   "deadline": _prose(budget.__doc__.split("Deadline\n--------")[1]),
                   "model_search_fits": options.MODEL_SEARCH_FITS, "model_work_budget": options.MODEL_WORK_BUDGET},
        "data_in": {
            "media_types": ["application/json", "text/csv"],
            "csv": _prose(csv_doc.split("-----------------------------------------------")[1]),
            "numbers_as_text": _prose(numbers_doc.split("The rule\n--------")[1]),
            "query_parameters": {"output": list(query.OUTPUT_PARAMS), "csv": list(query.CSV_PARAMS),
                                 "analysis": list(query.ANALYSIS_PARAMS), "transform": list(query.TRANSFORM_PARAMS)},
        },
        "data_out": {
            "formats": dict(options.FORMATS),
            "charts": list(options.CHART_KINDS),
            "csv_columns": list(CSV_COLUMNS),
            "chart_data": _prose(charts_doc.split("\n\n", 1)[1], MAX_TIME_POINTS=MAX_TIME_POINTS),
        },
        "batch": {
            "route": "/v1/diagnostics/batch",
            "per_series_overrides": list(BATCH_OVERRIDES),
            "media_types": ["application/json", "application/x-ndjson"],
            "detail": {"default": options.DEFAULT_DETAIL, "enum": list(options.DETAIL_LEVELS),
                       "brief_fields": ["id", *BRIEF_FIELDS]},
        },
        "decision_rule": _prose(DECISION_RULE.split("-" * 74)[1]),
        "evidence": _prose(whiteness.__doc__.split("References\n----------")[0], whiteness.__doc__,
                           REPLICATES=whiteness.REPLICATES, EXACT_MAX_N=whiteness.EXACT_MAX_N,
                           MAX_SIMULATED=whiteness.MAX_SIMULATED),
        "advice_codes": {"codes": list(advice.CODES), "rule": _prose(advice.__doc__)},
        "across_series": _prose(across.__doc__.split("References\n----------")[0], across.__doc__),
        "references": _prose(DECISION_SOURCES),
        "stability": {"route": "/v1/stability", "min_window": options.STABILITY_MIN_WINDOW,
                      "max_windows": options.STABILITY_MAX_WINDOWS, "change_points": _prose(
                          changepoints.__doc__.split("References")[0], changepoints.__doc__,
                          permutations=changepoints.PERMUTATIONS, min_blocks=changepoints.MIN_BLOCKS,
                          max_changes=changepoints.MAX_CHANGES)},
        "driver_check": {"route": "/v1/driver-check", "max_drivers": options.DRIVER_MAX,
                         "min_points": options.DRIVER_MIN_POINTS, "method": _prose(driver_doc.split("References")[0], driver_doc,
                                                           max_order=f"min({options.DRIVER_MAX_AR_ORDER}, n // 10)")},
    })


#: The published sources of the decision rule, in one place for /v1/methods.
DECISION_SOURCES = """
Ljung and Box (1978), Biometrika 65, 297-303. Diebold (1986), Proceedings of the Business and Economic Statistics
Section, ASA, 323-328. Lobato, Nankervis and Savin (2001), International Economic Review 42, 187-205. Westfall and
Young (1993), Resampling-Based Multiple Testing, Wiley. Said and Dickey (1984), Biometrika 71, 599-607. Kwiatkowski,
Phillips, Schmidt and Shin (1992), Journal of Econometrics 54, 159-178. Newey and West (1987), Econometrica 55,
703-708. Benjamini and Hochberg (1995), JRSS B 57, 289-300. Benjamini and Yekutieli (2001), Annals of Statistics
29, 1165-1188. Box, Jenkins, Reinsel and Ljung (2015), Time Series Analysis, 5th ed., Wiley.
"""

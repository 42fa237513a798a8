"""Query parameters: output options for every request, analysis options for text/csv bodies and GET.

Analysis options keep their JSON names (``max_lag=12``, ``missing=pairwise``); the
transform steps are flat (``log=true``, ``box_cox=estimate``, ``difference=1``,
``seasonal_difference=1``, ``detrend=linear``). Query strings only carry text, so
each value is turned into the JSON type its field expects before the one request
schema checks it; problems point at the JSON field of the same name.
"""
from __future__ import annotations

from werkzeug.datastructures import MultiDict

from lagsight import options
from lagsight.problems import FieldError, Problem, counted, did_you_mean

#: Options that shape the response, accepted on every diagnostics request.
OUTPUT_PARAMS = ("format", "chart", "vega_lite")
#: Options that describe the CSV body (see csv_input.py).
CSV_PARAMS = ("column", "time_column", "header", "delimiter", "decimal")
#: Analysis options with the JSON type each is converted to.
ANALYSIS_PARAMS = {
    "period": "integer", "max_lag": "integer", "confidence": "number", "model_df": "integer", "horizon": "integer",
    "name": "string",
    "missing": "string", "band": "string", "tests": "list", "p_values": "string", "replicates": "integer",
    "seed": "integer", "detail": "string", "digits": "integer", "charts": "boolean",
}
TRANSFORM_PARAMS = {"log": "boolean", "box_cox": "number_or_string", "difference": "integer",
                    "seasonal_difference": "integer", "detrend": "string"}
_NULL = ("", "null")


def _convert(text: str, kind: str):
    """Text to the JSON value it stands for; text that is not one is left for the schema to refuse."""
    if kind == "string":
        return text
    if kind == "list":
        return [part.strip() for part in text.split(",")]
    if text.strip().lower() in _NULL:
        return None
    if kind == "boolean":
        return {"true": True, "false": False}.get(text.strip().lower(), text)
    if kind == "integer":
        try:  # exactly, digit by digit: through a float, a seed near 2**63 would change or pass the maximum
            return int(text)
        except ValueError:
            pass
    try:
        number = float(text)
    except ValueError:
        return text
    if kind == "integer" and number.is_integer():
        return int(number)
    return number if kind in ("number", "number_or_string") else text


def _repeated(name: str, count: int) -> Problem:
    detail = (f"Query parameter {name} is given {count} times; give it once (a list, such as values or tests, "
              "is one comma-separated value).")
    return Problem("bad-request", detail, [FieldError(f"/{name}", detail)])


def _single(args: MultiDict, name: str) -> str:
    values = args.getlist(name)
    if len(values) > 1:
        raise _repeated(name, len(values))
    return values[0]


def check_known(args: MultiDict, allowed) -> None:
    """Refuse query parameters this request does not take (422: a typo would otherwise be ignored), and any
    parameter given more than once (400: every parameter takes one value; reading the first, or the last, of
    several would answer a question the caller did not ask)."""
    unknown = [k for k in args.keys() if k not in allowed]
    if unknown:
        errors = [FieldError(f"/{k}", f"Unknown query parameter {k!r} for this request.{did_you_mean(k, allowed)}")
                  for k in unknown]
        raise Problem("invalid-content", f"{counted(len(errors), 'query parameter is', 'query parameters are')} not "
                                         "recognised; see errors.", errors)
    for name, values in args.lists():
        if len(values) > 1:
            raise _repeated(name, len(values))


def analysis_fields(args: MultiDict) -> dict:
    """The analysis options of a query string as a JSON-like dict for the request schema."""
    body: dict = {}
    for name, kind in ANALYSIS_PARAMS.items():
        if name in args:
            body[name] = _convert(_single(args, name), kind)
    transform = {name: _convert(_single(args, name), kind) for name, kind in TRANSFORM_PARAMS.items() if name in args}
    if transform:
        body["transform"] = transform
    return body


def output_options(args: MultiDict) -> dict:
    """format, chart and vega_lite from the query string, checked."""
    out = {"format": None, "chart": options.DEFAULT_CHART, "vega_lite": False}
    errors = []
    if "format" in args:
        fmt = _single(args, "format").strip().lower()
        if fmt not in options.FORMATS:
            errors.append(FieldError("/format", f"Must be one of {', '.join(options.FORMATS)}, got {fmt!r}."
                                                f"{did_you_mean(fmt, options.FORMATS)}"))
        out["format"] = fmt
    if "chart" in args:
        chart = _single(args, "chart").strip().lower()
        if chart not in options.CHART_KINDS:
            errors.append(FieldError("/chart", f"Must be one of {', '.join(options.CHART_KINDS)}, got {chart!r}."
                                               f"{did_you_mean(chart, options.CHART_KINDS)}"))
        out["chart"] = chart
    if "vega_lite" in args:
        flag = _convert(_single(args, "vega_lite"), "boolean")
        if not isinstance(flag, bool):
            errors.append(FieldError("/vega_lite", "Must be true or false."))
        out["vega_lite"] = flag is True
    if errors:
        raise Problem("invalid-content", f"{counted(len(errors), 'query parameter is', 'query parameters are')} "
                                         "invalid; see errors.", errors)
    return out

"""Messages a caller reads: counts agree in number ("1 field is", "2 fields are"), and an unknown field,
query parameter or option value is answered with the nearest allowed name ("Did you mean 'max_lag'?")."""
from __future__ import annotations

import ast
import re
from pathlib import Path

import pytest

from lagsight.problems import counted, did_you_mean

from .spec_tools import assert_valid

PACKAGE = Path(__file__).resolve().parents[1] / "service" / "lagsight"
URL = "/v1/diagnostics"
BATCH = "/v1/diagnostics/batch"
VALUES = [0.3, -1.2, 0.8, 0.5, 0.1, -0.4, 1.1, -0.9, 0.2, -0.3, 0.7, -0.6]


def _texts(path: Path):
    """The string constants of a module, f-strings included (their literal parts joined)."""
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Constant) and isinstance(node.value, str):
            yield node.lineno, node.value
        elif isinstance(node, ast.JoinedStr):
            yield node.lineno, "".join(v.value for v in node.values if isinstance(v, ast.Constant))


def test_no_message_of_web_or_inputs_writes_a_plural_in_parentheses():
    found = [f"{p.relative_to(PACKAGE)}:{line}: {text[:60]!r}"
             for stage in ("web", "inputs") for p in (PACKAGE / stage).rglob("*.py")
             for line, text in _texts(p) if "(s)" in text]
    quoted = re.compile(r"([\"'`])(?:(?!\1).)*\(s\)(?:(?!\1).)*\1")  # "(s)" inside a string literal
    scripts = [f"{p.name}: {line}" for p in (PACKAGE / "web" / "static").glob("*.js")
               for line in p.read_text().splitlines() if quoted.search(line)]
    assert found == [] and scripts == []


def test_count_and_suggestion_helpers():
    assert counted(1, "field is", "fields are") == "1 field is"
    assert counted(0, "field is", "fields are") == "0 fields are"
    assert counted(12_000, "series", "series") == "12,000 series"
    assert did_you_mean("maxlag", ["max_lag", "model_df"]) == " Did you mean 'max_lag'?"
    assert did_you_mean("BARTLET", ["white_noise", "bartlett"]) == " Did you mean 'bartlett'?"
    assert did_you_mean("zzz", ["max_lag", "model_df"]) == ""
    assert did_you_mean(7, ["max_lag"]) == "" and did_you_mean("  ", ["max_lag"]) == ""


def _problem(r, status=422):
    assert r.status_code == status, r.get_data(as_text=True)[:300]
    body = r.get_json()
    assert_valid(body, "Problem")
    return body


def _detail(problem, pointer):
    return next(e["detail"] for e in problem["errors"] if e["pointer"] == pointer)


def test_field_counts_agree_in_number(client):
    one = _problem(client.post(URL, json={"values": VALUES, "max_lag": "ten"}))
    assert one["detail"] == "1 field is invalid; see errors."
    two = _problem(client.post(URL, json={"values": VALUES, "max_lag": "ten", "band": "wide"}))
    assert two["detail"] == "2 fields are invalid; see errors."
    per_series = client.post(BATCH, json={"series": [{"id": "a", "values": VALUES, "period": 1}]}).get_json()
    assert per_series["results"][0]["error"]["detail"] == "1 field of this series is invalid; see errors."


def test_query_parameter_counts_agree_in_number(client):
    one = _problem(client.get(URL, query_string={"values": "1,2,3,4", "maxlag": "2"}))
    assert one["detail"] == "1 query parameter is not recognised; see errors."
    two = _problem(client.get(URL, query_string={"values": "1,2,3,4", "maxlag": "2", "colour": "red"}))
    assert two["detail"] == "2 query parameters are not recognised; see errors."
    bad = _problem(client.get(URL, query_string={"values": "1,2,3,4", "format": "jsn"}))
    assert bad["detail"] == "1 query parameter is invalid; see errors."


def test_missing_value_counts_agree_in_number(client):
    one = _problem(client.post(URL, json={"values": [1.0, None, 3.0, 2.0, 5.0, 4.0]}))
    assert one["errors"][0]["detail"].startswith("1 value is missing (null), the first at index 1;")
    two = _problem(client.post(URL, json={"values": [1.0, None, 3.0, None, 5.0, 4.0]}))
    assert two["errors"][0]["detail"].startswith("2 values are missing (null), the first at index 1;")
    filled = client.post(URL, json={"values": [None, 1.0, 3.0, 2.0, None, 5.0, 4.0, 6.0, 5.5, 7.0],
                                    "missing": "interpolate"}).get_json()
    warning = next(w["message"] for w in filled["warnings"] if w["code"] == "missing_ends_dropped")
    assert warning.startswith("1 missing value at the start or end was dropped")
    short = _problem(client.post(URL, json={"values": [1.0, 2.0, 4.0], "transform": {"difference": 1}}))
    assert _detail(short, "/transform/difference") == "Differencing 1 time leaves fewer than 3 points."


SUGGESTIONS = [
    # (method, url, json body or None, query, pointer, suggestion)
    ("post", URL, {"values": VALUES, "maxlag": 3}, {}, "/maxlag", "max_lag"),
    ("post", URL, {"values": VALUES, "transform": {"differnce": 1}}, {}, "/transform/differnce", "difference"),
    ("post", URL, {"values": VALUES, "band": "bartlet"}, {}, "/band", "bartlett"),
    ("post", URL, {"values": VALUES, "missing": "Interpolated"}, {}, "/missing", "interpolate"),
    ("post", URL, {"values": VALUES, "tests": ["ljungbox"]}, {}, "/tests/0", "ljung_box"),
    ("post", URL, {"values": VALUES, "p_values": "montecarlo"}, {}, "/p_values", "monte_carlo"),
    ("post", URL, {"values": VALUES, "transform": {"detrend": "linaer"}}, {}, "/transform/detrend", "linear"),
    ("post", BATCH, {"series": [{"id": 1, "values": VALUES}], "detial": "brief"}, {}, "/detial", "detail"),
    ("post", BATCH, {"series": [{"id": 1, "values": VALUES}], "detail": "breif"}, {}, "/detail", "brief"),
    ("get", URL, None, {"values": "1,2,3,4,5", "maxlag": "2"}, "/maxlag", "max_lag"),
    ("get", URL, None, {"values": "1,2,3,4,5", "format": "svgg"}, "/format", "svg"),
    ("get", URL, None, {"values": "1,2,3,4,5", "format": "svg", "chart": "corelogram"}, "/chart", "correlogram"),
]


@pytest.mark.parametrize("method,url,body,query,pointer,suggestion", SUGGESTIONS,
                         ids=[f"{c[4]}->{c[5]}" for c in SUGGESTIONS])
def test_unknown_names_and_values_get_a_did_you_mean(client, method, url, body, query, pointer, suggestion):
    r = getattr(client, method)(url, json=body, query_string=query) if body is not None else \
        getattr(client, method)(url, query_string=query)
    problem = _problem(r)
    assert _detail(problem, pointer).endswith(f"Did you mean {suggestion!r}?")


def test_a_batch_item_with_a_misspelt_field_gets_a_did_you_mean(client):
    body = client.post(BATCH, json={"series": [{"id": "a", "valeus": VALUES}]}).get_json()
    errors = body["results"][0]["error"]["errors"]
    assert {"pointer": "/series/0/valeus", "detail": "Unknown field. Did you mean 'values'?"} in errors


CSV_SUGGESTIONS = [
    ({"decimal": "coma"}, "/decimal", "comma"),
    ({"delimiter": "semicolom"}, "/delimiter", "semicolon"),
    ({"header": "ture"}, "/header", "true"),
    ({"column": "sale"}, "/column", "sales"),
    ({"time_column": "dat"}, "/time_column", "date"),
    ({"max_lga": "3"}, "/max_lga", "max_lag"),
]


@pytest.mark.parametrize("query,pointer,suggestion", CSV_SUGGESTIONS, ids=[c[1] for c in CSV_SUGGESTIONS])
def test_csv_options_get_a_did_you_mean(client, query, pointer, suggestion):
    text = "date,sales\n" + "".join(f"2024-01-{d + 1:02d},{v}\n" for d, v in enumerate(VALUES))
    problem = _problem(client.post(URL, data=text.encode(), content_type="text/csv", query_string=query))
    assert _detail(problem, pointer).endswith(f"Did you mean {suggestion!r}?")


def test_nothing_is_suggested_when_nothing_is_near(client):
    problem = _problem(client.post(URL, json={"values": VALUES, "qqqq": 1, "band": "zzzz"}))
    assert _detail(problem, "/qqqq") == "Unknown field."
    assert "Did you mean" not in _detail(problem, "/band")

"""text/csv bodies: every dialect listed in the contract, and a clear 4xx for every malformed file."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from statsmodels.tsa.stattools import acf as sm_acf

from .spec_tools import assert_valid

URL = "/v1/diagnostics"


def _series(n: int = 48, seed: int = 9) -> tuple[list[str], np.ndarray]:
    stamps = [d.date().isoformat() for d in pd.date_range("2021-01-01", periods=n, freq="MS")]
    return stamps, np.random.default_rng(seed).standard_normal(n).round(4) + 20.0


def _post(client, text: str | bytes, **query):
    data = text.encode("utf-8") if isinstance(text, str) else text
    return client.post(URL, data=data, content_type="text/csv", query_string=query)


def _expected_acf(values: np.ndarray, max_lag: int) -> list[float]:
    # statsmodels.tsa.stattools.acf(x, nlags, fft=False): the same biased ACF the service reports.
    return sm_acf(values, nlags=max_lag, fft=False)[1:].tolist()


def _table(stamps, values, delimiter=",", decimal=".", newline="\n", header=("date", "sales"), bom=False):
    lines = [delimiter.join(header)] if header else []
    for s, v in zip(stamps, values):
        cell = f"{v:.4f}".replace(".", decimal)
        lines.append(f"{s}{delimiter}{cell}")
    text = newline.join(lines) + newline
    return ("\ufeff" if bom else "") + text


DIALECTS = [
    ("comma", dict(), {}),
    ("semicolon+decimal-comma", dict(delimiter=";", decimal=","), {}),
    ("tab", dict(delimiter="\t"), {}),
    ("tab+decimal-comma", dict(delimiter="\t", decimal=","), {}),
    ("crlf", dict(newline="\r\n"), {}),
    ("bom", dict(bom=True), {}),
    ("bom+crlf+semicolon", dict(bom=True, newline="\r\n", delimiter=";", decimal=","), {}),
    ("no-header", dict(header=None), {"header": "false"}),
    ("explicit options", dict(delimiter=";", decimal=","), {"delimiter": "semicolon", "decimal": ","}),
    ("tab named", dict(delimiter="\t"), {"delimiter": "tab"}),
]


@pytest.mark.parametrize("name,fmt,query", DIALECTS, ids=[d[0] for d in DIALECTS])
def test_every_dialect_reads_the_same_series(client, name, fmt, query):
    stamps, values = _series()
    r = _post(client, _table(stamps, values, **fmt), max_lag=10, **query)
    assert r.status_code == 200, r.get_json()
    body = r.get_json()
    assert_valid(body, "Report")
    assert body["n"] == 48 and body["frequency"] == "monthly" and body["period"] == 12
    np.testing.assert_allclose(body["acf"]["values"], _expected_acf(values, 10), atol=1e-12)
    if fmt.get("header", ("date", "sales")):
        assert body["name"] == "sales"


def test_value_column_by_name_or_index_and_time_column_by_name(client):
    stamps, values = _series()
    other = values[::-1]
    text = "flag,when,a,b\n" + "".join(f"0,{s},{v:.4f},{w:.4f}\n" for s, v, w in zip(stamps, values, other))
    by_name = _post(client, text, column="b", time_column="when", max_lag=6).get_json()
    by_index = _post(client, text, column="3", time_column="1", max_lag=6).get_json()
    np.testing.assert_allclose(by_name["acf"]["values"], _expected_acf(other, 6), atol=1e-12)
    assert by_name["acf"]["values"] == by_index["acf"]["values"] and by_name["frequency"] == "monthly"
    case_blind = _post(client, text, column="B", time_column="WHEN", max_lag=6).get_json()
    assert case_blind["acf"]["values"] == by_name["acf"]["values"]


def test_single_column_without_header_or_time(client):
    values = np.random.default_rng(2).standard_normal(30).round(5)
    text = "\n".join(f"{v}" for v in values) + "\n\n\n"  # blank lines at the end are ignored
    body = _post(client, text, max_lag=5).get_json()
    assert body["n"] == 30 and body["frequency"] is None and body["name"] is None
    np.testing.assert_allclose(body["acf"]["values"], _expected_acf(values, 5), atol=1e-12)


def test_quoted_fields_and_missing_tokens(client):
    stamps, values = _series(24)
    rows = [f'"{s}","{v:.4f}"' for s, v in zip(stamps, values)]
    rows[3] = f'"{stamps[3]}",'
    rows[7] = f'"{stamps[7]}",NA'
    rows[11] = f'"{stamps[11]}",#N/A'
    text = '"date","value"\r\n' + "\r\n".join(rows) + "\r\n"
    refused = _post(client, text)
    assert refused.status_code == 422
    err = refused.get_json()["errors"][0]
    assert err["pointer"] == "/values/3" and err["line"] == 5 and err["column"] == 2
    body = _post(client, text, missing="interpolate", max_lag=5).get_json()
    assert body["missing"]["from_nulls"] == 3 and body["missing"]["interpolated"] == 3


def test_query_options_reach_the_analysis(client):
    stamps, values = _series(60)
    r = _post(client, _table(stamps, values), max_lag="8", confidence="0.9", model_df="1", period="6", name="till 3",
              log="true", difference="1")
    body = r.get_json()
    assert r.status_code == 200, body
    assert body["max_lag"] == 8 and body["confidence"] == 0.9 and body["model_df"] == 1 and body["period"] == 6
    assert body["name"] == "till 3" and [s["step"] for s in body["transform"]["steps"]] == ["log", "difference"]
    np.testing.assert_allclose(body["acf"]["values"], _expected_acf(np.diff(np.log(values)), 8), atol=1e-12)


def test_gaps_in_csv_timestamps_are_missing_observations(client):
    stamps, values = _series(36)
    keep = [i for i in range(36) if i not in (10, 11)]
    text = _table([stamps[i] for i in keep], values[keep])
    r = _post(client, text)
    err = r.get_json()["errors"][0]
    assert r.status_code == 422 and err["pointer"] == "/timestamps/10" and err["line"] == 12 and err["column"] == 1
    assert _post(client, text, missing="pairwise", max_lag=4).get_json()["missing"]["from_gaps"] == 2


MALFORMED = [
    # (body, query, status, pointer, line, column, phrase)
    (b"", {}, 400, "", None, None, "empty"),
    (b"date,value\n2021-01-01,1\n2021-02-01,\xff2\n", {}, 400, "", 3, None, "utf-8"),
    (b"value\n1\n2\x003\n4\n", {}, 400, "", 3, None, "nul"),
    (b'date,value\n2021-01-01,"1\n2021-02-01,2\n', {}, 400, "", 2, None, "quote"),
    (b"date,value,extra\n2021-01-01,1,0\n2021-02-01\n2021-03-01,3,0\n", {"column": "value"}, 400, "", 3, None,
     "field"),
    (b"date,value\n2021-01-01,1,5\n2021-02-01,2,5\n", {}, 400, "", 2, 3, "decimal comma"),
    (b"date,value\n2021-01-01,1\n2021-02-01,abc\n2021-03-01,3\n", {}, 422, "/values/1", 3, 2, "not a finite"),
    (b"date,value\n2021-01-01,1\n2021-02-01,inf\n2021-03-01,3\n", {}, 422, "/values/1", 3, 2, "finite"),
    (b"date;value\n2021-01-01;1,5\n2021-02-01;2.5,1\n2021-03-01;3\n", {"decimal": ","}, 422, "/values/1", 3, 2,
     "decimal"),
    (b"date,value\n2021-01-01,1\nnot a date,2\n2021-03-01,3\n", {"time_column": "date"}, 422, "/timestamps/1", 3,
     1, "ISO 8601"),
    (b"date,value\n2021-01-01,1\n2021-01-01,2\n2021-03-01,3\n", {}, 422, "/timestamps/1", 3, 1, "duplicate"),
    (b"date,value\n2021-01-01,1\n,2\n2021-03-01,3\n", {}, 422, "/timestamps/1", 3, 1, "empty"),
    (b"a,b,c\n1,2,3\n4,5,6\n7,8,9\n", {}, 422, "/column", None, None, "choose"),
    (b"a,b\n1,2\n3,4\n5,6\n", {"column": "z"}, 422, "/column", None, None, "no column"),
    (b"a,b\n1,2\n3,4\n5,6\n", {"column": "7"}, 422, "/column", None, None, "no column"),
    (b"a,b\n1,2\n3,4\n5,6\n", {"column": "a", "time_column": "a"}, 422, "/column", None, None, "same"),
    (b"value\n1\n2\n3\n", {"delimiter": "|"}, 422, "/delimiter", None, None, "must be"),
    (b"value\n1\n2\n3\n", {"decimal": "x"}, 422, "/decimal", None, None, "must be"),
    (b"value\n1\n2\n3\n", {"header": "maybe"}, 422, "/header", None, None, "true, false"),
    (b"value\n1\n2\n3\n", {"max_lag": "two"}, 422, "/max_lag", None, None, "integer"),
    (b"value\n1\n2\n3\n", {"maxlag": "2"}, 422, "/maxlag", None, None, "unknown"),
    (b"value\n1\n2\n", {}, 422, "/values", None, None, "at least 3"),
    (b"value\n", {}, 422, "/values", None, None, "at least 3"),
]


@pytest.mark.parametrize("raw,query,status,pointer,line,column,phrase", MALFORMED)
def test_malformed_csv_gets_a_clear_4xx_with_line_and_column(client, raw, query, status, pointer, line, column,
                                                               phrase):
    r = _post(client, raw, **query)
    assert r.status_code == status, r.get_json()
    assert r.mimetype == "application/problem+json"
    problem = r.get_json()
    assert_valid(problem, "Problem")
    assert problem["type"].endswith("malformed-csv" if status == 400 else "invalid-content")
    err = next(e for e in problem["errors"] if e["pointer"] == pointer)
    assert phrase.lower() in err["detail"].lower()
    if line is not None:
        assert err["line"] == line
        assert f"line {line}" in err["detail"].lower()
    if column is not None:
        assert err["column"] == column


def test_other_text_media_types_are_415(client):
    r = client.post(URL, data=b"1\n2\n3\n", content_type="text/plain")
    assert r.status_code == 415 and "text/csv" in r.get_json()["detail"]


from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

_CELLS = st.one_of(st.floats(allow_nan=True, allow_infinity=True).map(repr), st.integers().map(str),
                   st.sampled_from(["", "NA", "x", "2021-01-01", '"', "1,5", "-", " 3 "]), st.text(max_size=6))


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=st.lists(st.lists(_CELLS, min_size=1, max_size=4), max_size=12),
       delimiter=st.sampled_from([",", ";", "\t"]), newline=st.sampled_from(["\n", "\r\n"]),
       query=st.dictionaries(st.sampled_from(["column", "time_column", "header", "decimal", "missing"]),
                             st.sampled_from(["0", "1", "a", "true", "false", ",", "pairwise", "none"]), max_size=3))
def test_any_table_gets_a_report_or_a_clear_4xx(client, rows, delimiter, newline, query):
    """Fuzzing (hypothesis): whatever the table, the answer is 200 or a 400/422 problem, never a 500."""
    text = newline.join(delimiter.join(r) for r in rows)
    r = _post(client, text, **query)
    assert r.status_code in (200, 400, 422), (r.status_code, r.get_data(as_text=True)[:300])
    if r.status_code != 200:
        assert r.mimetype == "application/problem+json" and r.get_json()["errors"]


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.binary(max_size=200))
def test_any_bytes_get_a_report_or_a_clear_4xx(client, data):
    r = client.post(URL, data=data, content_type="text/csv")
    assert r.status_code in (200, 400, 422), (r.status_code, r.get_data(as_text=True)[:300])

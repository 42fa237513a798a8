"""How requests are read: a query parameter given twice, and JSON that starts with a byte-order mark."""
from __future__ import annotations

import orjson
import pytest

from .spec_tools import assert_valid

URL = "/v1/diagnostics"
CSV = "value\n1.5\n-0.2\n0.7\n-1.1\n0.4\n0.9\n-0.3\n"
VALUES = [1.5, -0.2, 0.7, -1.1, 0.4, 0.9, -0.3]
BOM = b"\xef\xbb\xbf"


def _problem(r, status: int) -> dict:
    assert r.status_code == status, (r.status_code, r.get_data()[:300])
    assert r.content_type == "application/problem+json"
    problem = r.get_json()
    assert_valid(problem, "Problem")
    return problem


#: (method, query string, body, content type, the parameter given twice)
REPEATS = [
    ("GET", "values=1,2,3,4,5,6&values=9,9,9,9,9,9", None, None, "values"),
    ("GET", "values=1,2,3,4,5,6&max_lag=2&max_lag=3", None, None, "max_lag"),
    ("GET", "values=1,2,3,4,5,6&tests=ljung_box&tests=box_pierce", None, None, "tests"),
    ("GET", "values=1,2,3,4&timestamps=2024-01-01,2024-01-02&timestamps=2024-02-01,2024-02-02", None, None,
     "timestamps"),
    ("GET", "values=1,2,3,4,5,6&format=json&format=csv", None, None, "format"),
    ("POST", "column=value&column=value", CSV, "text/csv", "column"),
    ("POST", "log=false&log=true", CSV, "text/csv", "log"),
    ("POST", "period=2&period=3", CSV, "text/csv", "period"),
    ("POST", "chart=acf&chart=pacf", orjson.dumps({"values": VALUES}), "application/json", "chart"),
    ("POST", "vega_lite=true&vega_lite=true", orjson.dumps({"values": VALUES}), "application/json", "vega_lite"),
]


@pytest.mark.parametrize("method,query,body,content_type,name", REPEATS, ids=[f"{r[0]}-{r[4]}" for r in REPEATS])
def test_a_parameter_given_twice_is_400_naming_it(client, method, query, body, content_type, name):
    """Reading the first (or the last) of two values would answer a question the caller did not ask."""
    r = client.open(f"{URL}?{query}", method=method, data=body, content_type=content_type)
    problem = _problem(r, 400)
    assert problem["type"] == "urn:lagsight:problem:bad-request"
    assert f"Query parameter {name} is given 2 times" in problem["detail"]
    assert [e["pointer"] for e in problem["errors"]] == [f"/{name}"]


def test_each_parameter_once_is_answered(client):
    assert client.get(f"{URL}?values=1,2,3,4,5,6&max_lag=2&tests=ljung_box,box_pierce").status_code == 200
    assert client.post(f"{URL}?column=value&period=2", data=CSV, content_type="text/csv").status_code == 200


@pytest.mark.parametrize("route,body", [
    (URL, {"values": VALUES, "name": "call centre waits"}),
    (URL + "/batch", {"series": [{"id": "north", "values": VALUES}, {"id": "south", "values": VALUES[::-1]}]}),
])
def test_json_with_a_utf8_byte_order_mark_is_read(client, route, body):
    """RFC 8259 section 8.1: a parser may ignore a leading byte-order mark (PowerShell 5 writes one)."""
    plain = client.post(route, data=orjson.dumps(body), content_type="application/json")
    marked = client.post(route, data=BOM + orjson.dumps(body), content_type="application/json")
    assert plain.status_code == marked.status_code == 200
    assert marked.get_json() == plain.get_json()


@pytest.mark.parametrize("body,says", [
    (BOM + b'{"values": [1, 2, 3]', "line 1, column 21"),  # the position in the text after the mark
    (BOM, "empty"),
    (BOM + b"  \n", "empty"),
    (b"\xff\xfe" + '{"values": [1, 2, 3]}'.encode("utf-16-le"), "not UTF-8"),
    (BOM + BOM + b'{"values": [1, 2, 3]}', "line 1, column 1"),
])
def test_broken_json_after_a_mark_gets_a_plain_400(client, body, says):
    problem = _problem(client.post(URL, data=body, content_type="application/json"), 400)
    assert problem["type"] == "urn:lagsight:problem:malformed-json" and says in problem["detail"]
    for internal in ("utf-8-sig", "decode", "Traceback", "Error", "b'", "\\x"):
        assert internal not in problem["detail"], problem["detail"]


@pytest.mark.parametrize("seed", [9223372036854775807, 9223372036854775806, 9007199254740993])
def test_an_integer_in_the_query_is_read_exactly(client, seed):
    """Integers in the query string are read digit by digit: read through a float, 2**63 - 1 became 2**63 and was
    refused as above the maximum (found by schemathesis at the schema's bound), and 2**53 + 1 became 2**53."""
    r = client.get(f"{URL}?values=1.5,-0.2,0.7,-1.1,0.4,0.9,-0.3,0.2&p_values=monte_carlo&replicates=99&seed={seed}")
    assert r.status_code == 200, r.get_data()[:300]
    assert r.get_json()["p_values"]["seed"] == seed
    above = client.get(f"{URL}?values=1.5,-0.2,0.7,-1.1,0.4,0.9,-0.3,0.2&seed=9223372036854775808")
    assert _problem(above, 422)["errors"][0]["pointer"] == "/seed"

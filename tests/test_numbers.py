"""Numbers written as text: one rule (inputs/numbers.py) for CSV cells, query strings and the page (reading.js).

The page runs the same table of cases in a real browser (tests/test_page_browser.py). The spreadsheet formats
below (which list separator, decimal mark and thousands separator a locale's spreadsheet writes) are common
practice, no source.
"""
from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from statsmodels.tsa.stattools import acf as sm_acf

from lagsight.inputs import numbers

from .spec_tools import assert_valid

ROOT = Path(__file__).resolve().parents[1]
CASES = json.loads((ROOT / "tests" / "data" / "number_cases.json").read_text())
READING_JS = ROOT / "service" / "lagsight" / "web" / "static" / "reading.js"
URL = "/v1/diagnostics"


def _outcome(text: str, mark: str):
    try:
        return numbers.read(text, mark)
    except ValueError:
        return "x"


@pytest.mark.parametrize("text,point,comma", CASES["numbers"], ids=[repr(c[0]) for c in CASES["numbers"]])
def test_each_case_reads_as_the_table_says(text, point, comma):
    assert _outcome(text, ".") == point
    assert _outcome(text, ",") == comma


@pytest.mark.parametrize("case", CASES["columns"], ids=[",".join(c["cells"]) for c in CASES["columns"]])
def test_a_column_takes_the_mark_every_cell_allows(case):
    read = numbers.read_column(case["cells"])
    if case["mark"] == "ambiguous":
        assert read.ambiguous == case["first"]
        return
    assert read.ambiguous is None and read.mark == case["mark"]
    if "bad" in case:
        assert read.bad == case["bad"] and read.n_bad == len(case["bad"])
    else:
        assert read.values == case["values"] and read.bad == []


def test_the_page_holds_the_same_patterns():
    """reading.js builds its regular expressions from the same strings as numbers.py."""
    js = READING_JS.read_text()
    found = re.findall(r'"([.,])": String\.raw`([^`]*)`', js)
    assert found == [(m, numbers.PLAIN[m]) for m in numbers.MARKS] + [(m, numbers.GROUPED[m]) for m in numbers.MARKS]
    assert 'const SPACE = " \\t\\r\\n\\u00a0\\u202f";' in js and numbers.SPACE == " \t\r\n\u00a0\u202f"
    assert 'const SIGNS = "+-\\u2212";' in js and numbers.SIGNS == "+-\u2212"
    missing = re.search(r"const MISSING = new Set\(\[([^\]]*)\]\)", js).group(1)
    assert set(json.loads(f"[{missing}]")) == set(numbers.options.CSV_MISSING_TOKENS)


@settings(max_examples=400, deadline=None)
@given(st.text(alphabet="0123456789eE+-.\n", max_size=12))
def test_the_fast_path_reads_exactly_what_the_rule_reads(text):
    """Plain text over the fast path's characters: float() and the rule agree (so the one-step conversion of a
    clean column is the rule, not another one)."""
    cells = text.split("\n")
    by_rule = []
    for cell in cells:
        try:
            by_rule.append(numbers.read(cell, "."))
        except ValueError:
            by_rule.append("x")
    read = numbers.read_column(cells, ".")
    assert read.values == [None if v == "x" else v for v in by_rule]
    assert read.bad == [i for i, v in enumerate(by_rule) if v == "x"][:10]


def _values(n: int = 60, seed: int = 4) -> np.ndarray:
    """Seeded values between about -3,000 and 6,000, so that some need a thousands separator and some are negative."""
    return (np.random.default_rng(seed).standard_normal(n) * 1500 + 1500).round(2)


def _written(v: float, decimal: str, group: str) -> str:
    return f"{v:,.2f}".replace(",", "\0").replace(".", decimal).replace("\0", group)


#: (name, delimiter, decimal mark, thousands separator, quote the value cells)
LOCALES = [
    ("comma decimal, semicolon list, point thousands", ";", ",", ".", False),
    ("comma decimal, semicolon list, narrow no-break space thousands", ";", ",", "\u202f", False),
    ("comma decimal, tab list, space thousands", "\t", ",", " ", False),
    ("point decimal, comma list, comma thousands (quoted)", ",", ".", ",", True),
    ("point decimal, semicolon list, apostrophe thousands", ";", ".", "'", False),
    ("point decimal, comma list, no thousands", ",", ".", "", False),
    ("comma decimal, comma list, quoted", ",", ",", "", True),
]


def export(values, delimiter: str, decimal: str, group: str, quote: bool) -> str:
    """A table as a spreadsheet of that locale saves it: header, ISO dates, the value in its local format."""
    days = np.datetime64("2025-03-03") + np.arange(len(values))
    cells = [_written(v, decimal, group) for v in values]
    cells = [f'"{c}"' if quote else c for c in cells]
    lines = [delimiter.join(["day", "litres"])] + [f"{d}{delimiter}{c}" for d, c in zip(days, cells)]
    return "\r\n".join(lines) + "\r\n"


@pytest.mark.parametrize("name,delimiter,decimal,group,quote", LOCALES, ids=[loc[0] for loc in LOCALES])
def test_spreadsheet_exports_of_common_locales_read_the_same_series(client, name, delimiter, decimal, group, quote):
    values = _values()
    r = client.post(URL, data=export(values, delimiter, decimal, group, quote).encode(), content_type="text/csv",
                    query_string={"max_lag": 8})
    body = r.get_json()
    assert r.status_code == 200, body
    assert_valid(body, "Report")
    assert body["n"] == 60 and body["frequency"] == "daily" and body["name"] == "litres"
    # statsmodels.tsa.stattools.acf(x, nlags, fft=False): the biased ACF the service reports
    np.testing.assert_allclose(body["acf"]["values"], sm_acf(values, nlags=8, fft=False)[1:], atol=1e-12)


def test_a_column_that_reads_two_ways_is_refused_until_the_mark_is_given(client):
    """Every cell has three decimals and no zero before the mark: each reads with a point or as thousands."""
    values = np.random.default_rng(7).uniform(1.001, 9.999, 40).round(3)
    text = "day;kg\n" + "".join(f"2025-03-{d + 1:02d};{v:.3f}\n" for d, v in enumerate(values[:28]))
    r = client.post(URL, data=text.encode(), content_type="text/csv")
    problem = r.get_json()
    assert r.status_code == 422 and problem["errors"][0]["pointer"] == "/decimal"
    detail = problem["errors"][0]["detail"]
    assert detail.startswith("Line 2, column 2: ") and "decimal=point or decimal=comma" in detail
    first = f"{values[0]:.3f}"
    assert f"is {float(first):.15g} with a decimal point and {float(first.replace('.', '')):.15g}" in detail
    ok = client.post(URL, data=text.encode(), content_type="text/csv", query_string={"decimal": "point"}).get_json()
    np.testing.assert_allclose(ok["acf"]["values"][:3], sm_acf(values[:28], nlags=3, fft=False)[1:], atol=1e-12)


def test_a_cell_written_with_the_other_mark_is_named_with_a_hint(client):
    text = "w;v\n" + "".join(f"{i};{i % 7},5\n" for i in range(20)) + "20;7.25\n"
    problem = client.post(URL, data=text.encode(), content_type="text/csv", query_string={"column": "v"}).get_json()
    assert problem["detail"] == "1 cell of the value column is not a number; see errors."
    assert problem["errors"][0]["detail"] == ("Line 22, column 2: '7.25' is not a finite number (it reads as a number "
                                              "with a decimal point, but the column's decimal mark is the comma).")


def test_the_query_string_reads_its_values_by_the_same_rule(client):
    values = ["1'234.5", "980.25", "1 020.75", "\u22125.5", "1,5e3".replace(",", "."), "12", "1 100"]
    r = client.get(URL, query_string={"values": ",".join(values), "max_lag": 2})
    assert r.status_code == 200, r.get_json()
    expected = [1234.5, 980.25, 1020.75, -5.5, 1500.0, 12.0, 1100.0]
    np.testing.assert_allclose(r.get_json()["acf"]["values"], sm_acf(expected, nlags=2, fft=False)[1:], atol=1e-12)
    for bad in ("1_000", "inf", "0x10"):  # float() takes the first; the rule takes none
        refused = client.get(URL, query_string={"values": f"1,2,{bad},4,5"})
        assert refused.status_code == 422 and refused.get_json()["errors"][0]["pointer"] == "/values/2", bad

"""Property tests (hypothesis) on the engine and the request parsers.

Invariances of the sample autocorrelation r_k = c_k / c_0 (biased autocovariance):
it is unchanged by adding a constant, by multiplying by a positive constant and by
reversing time (c_k sums the same products in the other order), and |r_k| <= 1
(Cauchy-Schwarz on the centred series; Box, Jenkins, Reinsel and Ljung 2015,
section 2.1). The partial autocorrelations from Durbin-Levinson on a biased ACF
also lie in [-1, 1] (the biased autocovariance sequence is positive semi-definite;
same reference, section 3.2). The parsers must turn any input into a report or a
4xx problem: no exception escapes as a 500.
"""
from __future__ import annotations

import datetime
import json

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from lagsight import create_app
from lagsight.engine import acf, pacf, portmanteau
from lagsight.inputs.timestamps import describe
from lagsight.problems import Problem

SETTINGS = settings(max_examples=200, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow])

moderate = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False)
any_finite = st.floats(allow_nan=False, allow_infinity=False)
lengths = st.integers(min_value=3, max_value=120)


def series(elements=moderate):
    return lengths.flatmap(lambda n: arrays(np.float64, n, elements=elements))


def spread_ok(x: np.ndarray, extra: float = 0.0) -> bool:
    """Enough variation that rounding in x (or x + c) is small next to it."""
    return np.ptp(x) > 1e-6 * (np.max(np.abs(x)) + abs(extra)) and np.ptp(x) > 1e-250


def r_of(x: np.ndarray, max_lag: int | None = None) -> np.ndarray:
    return acf(x[None, :], max_lag or x.size - 1)[0]


@SETTINGS
@given(series(), moderate)
def test_acf_unchanged_by_a_shift(x, c):
    assume(spread_ok(x, c))
    np.testing.assert_allclose(r_of(x + c), r_of(x), atol=1e-7)


@SETTINGS
@given(series(), st.floats(min_value=1e-50, max_value=1e50))
def test_acf_unchanged_by_positive_scaling(x, a):
    assume(spread_ok(x) and spread_ok(a * x))  # a tiny a can push a tiny x into underflow
    np.testing.assert_allclose(r_of(a * x), r_of(x), atol=1e-9)


@SETTINGS
@given(series())
def test_acf_unchanged_by_time_reversal(x):
    assume(spread_ok(x))
    np.testing.assert_allclose(r_of(x[::-1].copy()), r_of(x), atol=1e-9)


@SETTINGS
@given(series(any_finite))
def test_acf_and_pacf_are_bounded_by_one_over_the_whole_float_range(x):
    assume(x.min() != x.max())
    r = r_of(x)
    assert np.isfinite(r).all() and (np.abs(r) <= 1 + 1e-12).all()
    phi = pacf(r[None, :])[0]
    assert np.isfinite(phi).all() and (np.abs(phi) <= 1 + 1e-9).all()


@SETTINGS
@given(series(), st.integers(min_value=0, max_value=5))
def test_portmanteau_statistics_are_non_negative_and_p_values_are_probabilities(x, model_df):
    assume(spread_ok(x))
    n = x.size
    r = r_of(x)[None, :]
    lags = sorted({1, n - 1})
    for kind in ("ljung_box", "box_pierce"):
        stat, df, p = portmanteau(r, n, lags, model_df, kind)
        assert (stat >= 0).all()
        ok = df > 0
        assert ((p[:, ok] >= 0) & (p[:, ok] <= 1)).all() and np.isnan(p[:, ~ok]).all()


@pytest.fixture(scope="module")
def client():
    return create_app({"TESTING": True, "MAX_POINTS": 500, "MAX_BODY_BYTES": 50_000}).test_client()


json_values = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats() | st.text(max_size=20),
    lambda inner: st.lists(inner, max_size=6) | st.dictionaries(st.text(max_size=10), inner, max_size=6),
    max_leaves=30,
)
bodies = st.fixed_dictionaries(
    {"values": st.lists(st.one_of(any_finite, st.integers(), st.none(), json_values), max_size=40)},
    optional={
        "period": json_values | st.integers(-5, 50), "max_lag": json_values | st.integers(-5, 50),
        "confidence": json_values | st.floats(-1, 2), "model_df": json_values | st.integers(-5, 50),
        "name": json_values, "timestamps": st.lists(st.text(max_size=30), max_size=40) | json_values,
    },
)


def _assert_report_or_problem(r):
    assert r.status_code in (200, 400, 413, 415, 422), (r.status_code, r.data[:300])
    if r.status_code == 200:
        body = r.get_json()
        assert all(abs(v) <= 1 + 1e-12 for v in body["acf"]["values"])
        assert b"NaN" not in r.data and b"Infinity" not in r.data
    else:
        assert r.mimetype == "application/problem+json" and r.get_json()["status"] == r.status_code


@SETTINGS
@given(bodies)
def test_any_json_body_gets_a_report_or_a_4xx_problem(client, body):
    text = json.dumps(body, allow_nan=True)  # NaN/Infinity literals included on purpose
    _assert_report_or_problem(client.post("/v1/diagnostics", data=text, content_type="application/json"))


@SETTINGS
@given(st.binary(max_size=300), st.sampled_from(["application/json", "application/problem+json", "text/csv", ""]))
def test_any_bytes_get_a_report_or_a_4xx_problem(client, raw, media):
    _assert_report_or_problem(client.post("/v1/diagnostics", data=raw, content_type=media or None))


@SETTINGS
@given(st.lists(st.text(min_size=1, max_size=64), min_size=1, max_size=12))
def test_timestamp_parser_returns_an_axis_or_a_pointed_problem(stamps):
    try:
        axis = describe(stamps, 10_000)
    except Problem as p:
        assert p.status == 422 and p.errors and p.errors[0].pointer.startswith("/timestamps")
    else:
        assert axis.size >= len(stamps)


@SETTINGS
@given(st.lists(st.dates(min_value=datetime.date(2000, 1, 1), max_value=datetime.date(2030, 12, 31)).map(str),
                min_size=3, max_size=30, unique=True))
def test_sorted_distinct_dates_always_parse(dates):
    axis = describe(sorted(dates), 1_000_000)
    assert axis.size >= len(dates)
    if axis.slots is not None:
        assert len(axis.slots) == len(dates) and (np.diff(axis.slots) > 0).all()


csv_cells = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr), st.integers().map(str),
    st.dates().map(str), st.sampled_from(["", "NA", "null", "-", "#N/A", "1,5", '"2"', "=1+1", "\x00"]),
    st.text(max_size=8),
)
csv_bodies = st.tuples(
    st.sampled_from([",", ";", "\t"]),
    st.lists(st.lists(csv_cells, min_size=1, max_size=4), min_size=0, max_size=30),
    st.booleans(),
).map(lambda t: ("value" + t[0] + "other\n" if t[2] else "") + "\n".join(t[0].join(row) for row in t[1]))
csv_queries = st.fixed_dictionaries({}, optional={
    "column": st.sampled_from(["0", "1", "value", "other", "9", "\u00b3"]),
    "time_column": st.sampled_from(["0", "none", "value", "\u00b3"]),
    "header": st.sampled_from(["true", "false", "auto", "maybe"]),
    "delimiter": st.sampled_from([",", ";", "tab", "|"]),
    "decimal": st.sampled_from([".", ",", "x"]),
    "missing": st.sampled_from(["refuse", "interpolate", "pairwise", "guess"]),
})


@SETTINGS
@given(csv_bodies, csv_queries)
def test_any_csv_table_gets_a_report_or_a_4xx_problem(client, body, query):
    from urllib.parse import urlencode

    r = client.post("/v1/diagnostics?" + urlencode(query), data=body.encode("utf-8", "surrogatepass"),
                    content_type="text/csv")
    _assert_report_or_problem(r)


@SETTINGS
@given(series(any_finite))
def test_jarque_bera_is_finite_and_scale_free_over_the_whole_float_range(x):
    """Skewness and kurtosis are ratios of central moments, so any positive scale leaves them unchanged
    (Jarque and Bera 1987); values near the float limit must not overflow the fourth powers."""
    from lagsight.engine.randomness import jarque_bera

    assume(x.min() != x.max())
    peak = np.max(np.abs(x))
    d = np.ldexp(x, -np.frexp(peak)[1])  # exact power-of-two rescaling to |d| < 1
    d = d - d.mean()
    assume(np.ptp(d) > 1e-150)
    stat, p, skew, kurt = jarque_bera(d[None, :])
    assert np.isfinite(stat).all() and ((p >= 0) & (p <= 1)).all()
    stat_big = jarque_bera(np.ldexp(d, 900)[None, :])[0]  # the same data at magnitude ~1e270
    np.testing.assert_allclose(stat_big, stat, rtol=1e-12)

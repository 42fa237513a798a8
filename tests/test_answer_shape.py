"""The answer's shape: the reading first, numbers to `digits`, a batch's shared values once, detail on the
single route, and the size of the answer (deterministic, so asserted here; speed is measured in benchmarks/)."""
from __future__ import annotations

import math

import numpy as np
import pytest

from lagsight import options
from lagsight.outputs import digits as rounding
from lagsight.outputs.brief import FIELDS
from lagsight.outputs.report import KEYS
from lagsight.outputs.shared import PATHS, merged

from .spec_tools import assert_valid

SINGLE = "/v1/diagnostics"
BATCH = "/v1/diagnostics/batch"


def _noise(n: int, seed: int) -> list[float]:
    return np.random.default_rng(seed).standard_normal(n).tolist()


def _floats(obj, path=""):
    """Every float in a JSON value, with its path."""
    if isinstance(obj, float):
        yield path, obj
    elif isinstance(obj, dict):
        for k, v in obj.items():
            yield from _floats(v, f"{path}/{k}")
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            yield from _floats(v, f"{path}/{i}")


def _significant(x: float) -> int:
    """Significant digits of the shortest decimal that reads back as x."""
    mantissa = repr(abs(x)).split("e")[0].replace(".", "").lstrip("0").rstrip("0")
    return len(mantissa)


def test_the_reading_comes_first(client):
    report = client.post(SINGLE, json={"values": _noise(120, 1), "max_lag": 24}).get_json()
    assert list(report) == list(KEYS)
    assert list(report)[:2] == ["verdict", "advice"]
    assert list(report["verdict"])[:3] == ["white_noise", "summary", "structure"]
    assert report["interpretation"][0] == report["verdict"]["summary"]  # the headline
    brief = client.post(BATCH, json={"series": [{"id": 1, "values": _noise(60, 2)}], "detail": "brief"}).get_json()
    assert list(brief["results"][0]) == ["id", *FIELDS] and FIELDS[0] == "verdict"
    batch = client.post(BATCH, json={"series": [{"id": 1, "values": _noise(60, 2)}]}).get_json()
    assert list(batch["results"][0])[:3] == ["id", "verdict", "advice"]


def test_detail_brief_on_the_single_route_reads_as_the_batch_result(client):
    x = _noise(80, 3)
    single = client.post(SINGLE, json={"values": x, "detail": "brief"}).get_json()
    assert_valid(single, "BriefReport")
    batch = client.post(BATCH, json={"series": [{"id": "a", "values": x}], "detail": "brief"}).get_json()
    assert {k: single[k] for k in FIELDS} == {k: v for k, v in batch["results"][0].items() if k != "id"}
    assert single["detail"] == "brief" and 'detail "full"' in single["full_report"]
    assert any("not proof" in c for c in single["cautions"])
    assert not any("series analysed here" in c for c in single["cautions"])  # no count across series for one
    query = client.get(SINGLE, query_string={"values": ",".join(map(str, x)), "detail": "brief"}).get_json()
    assert query == single


def test_a_batch_says_its_shared_values_once(client):
    series = [{"id": i, "values": _noise(120, 10 + i)} for i in range(6)]
    body = client.post(BATCH, json={"series": series + [{"id": "bad", "values": [1, 2]}], "max_lag": 24}).get_json()
    assert_valid(body, "BatchResponse")
    shared = body["shared"]
    assert shared["acf"]["lags"] == list(range(1, 25)) and len(shared["acf"]["upper"]) == 24
    assert shared["band"]["kind"] == "white_noise" and shared["periodogram"]["frequencies"][0] == pytest.approx(1 / 120)
    assert [t["meaning"] for t in shared["tests"]][0].startswith("Are the first 10 autocorrelations")
    results = body["results"]
    assert "error" in results[-1]
    for r in results[:-1]:
        for path in PATHS:  # each shared value is left out of every result
            holder = r if len(path) == 1 else r[path[0]]
            assert path[-1] not in holder, path
        assert all("meaning" not in t and "method" not in t for t in r["tests"])
    for item, r in zip(series, results):  # put back, each is the single route's report
        single = client.post(SINGLE, json={"values": item["values"], "max_lag": 24}).get_json()
        assert merged(r, shared) == {"id": item["id"], **single}


def test_values_that_differ_stay_with_their_series(client):
    """shared holds the first analysed series' values; a series of another length keeps its own band and
    frequencies, and a series like the first leaves them out."""
    series = [{"id": "short", "values": _noise(60, 1)}, {"id": "long", "values": _noise(200, 2)},
              {"id": "short-2", "values": _noise(60, 3)}]
    body = client.post(BATCH, json={"series": series, "max_lag": 12}).get_json()
    assert_valid(body, "BatchResponse")
    shared, (short, long, short2) = body["shared"], body["results"]
    assert shared["acf"]["lags"] == list(range(1, 13)) and len(shared["periodogram"]["frequencies"]) == 29
    assert "upper" not in short["acf"] and "upper" not in short2["acf"] and "frequencies" not in short2["periodogram"]
    assert "upper" in long["acf"] and len(long["periodogram"]["frequencies"]) == 99 and "lags" not in long["acf"]
    for item, r in zip(series, body["results"]):
        single = client.post(SINGLE, json={"values": item["values"], "max_lag": 12}).get_json()
        assert merged(r, shared) == {"id": item["id"], **single}
    assert client.post(BATCH, json={"series": [{"id": 1, "values": [1, 2]}]}).get_json()["shared"] == {}


def test_digits_rounds_every_number_written(client):
    x = _noise(120, 4)
    for digits in (3, 6):
        report = client.post(SINGLE, json={"values": x, "digits": digits, "charts": True}).get_json()
        assert_valid(report, "Report")
        found = list(_floats(report))
        assert len(found) > 500
        assert all(_significant(v) <= digits for _, v in found), [p for p, v in found if _significant(v) > digits][:5]


def test_digits_rounds_to_the_nearest_and_flags_come_from_the_unrounded_numbers(client):
    x = _noise(120, 5)
    exact = client.post(SINGLE, json={"values": x, "digits": None}).get_json()
    three = client.post(SINGLE, json={"values": x, "digits": 3}).get_json()
    for (p, a), (q, b) in zip(_floats(exact), _floats(three), strict=True):
        assert p == q and b == float(f"{a:.3g}"), p
    assert [t["reject"] for t in three["tests"]] == [t["reject"] for t in exact["tests"]]
    assert three["acf"]["outside"] == exact["acf"]["outside"]


def test_the_default_digits_keep_the_stated_rounding_error(client):
    """At the default, every number is within half a unit of its last digit of the full-precision one: a relative
    error of at most 5 x 10^-digits (5e-13 at 13 digits, below the tightest relative tolerance, 1e-12, at which
    the tests compare answers with references; the engine's exact numbers are compared in its own tests)."""
    x = _noise(200, 6)
    exact = client.post(SINGLE, json={"values": x, "period": 12, "digits": None}).get_json()
    default = client.post(SINGLE, json={"values": x, "period": 12}).get_json()
    bound = 5 * 10.0 ** -options.DEFAULT_DIGITS
    pairs = list(zip(_floats(exact), _floats(default), strict=True))
    assert len(pairs) > 500
    for (p, a), (_, b) in pairs:
        assert abs(a - b) <= bound * abs(a), (p, a, b)
    assert exact["verdict"]["white_noise"] == default["verdict"]["white_noise"]
    assert exact["interpretation"] == default["interpretation"]  # sentences quote the unrounded decision


@pytest.mark.parametrize("value", [0, 18, 2.5, "6", True])
def test_digits_outside_its_range_is_refused(client, value):
    r = client.post(SINGLE, json={"values": _noise(30, 1), "digits": value})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/digits"


def test_rounding_of_arrays_matches_text_formatting():
    rng = np.random.default_rng(7)
    a = np.concatenate([rng.standard_normal(500) * 10.0 ** rng.integers(-30, 30, 500), [0.0, math.inf, -math.inf]])
    for d in (1, 4, 10, 15):
        got = rounding.array(a, d).tolist()
        want = [float(f"{v:.{d}g}") if math.isfinite(v) else v for v in a.tolist()]
        close = [g == w or abs(g - w) <= 10.0 ** (1 - d) * abs(w) for g, w in zip(got, want)]  # halfway ties
        assert all(close) and all(_significant(g) <= d for g in got if math.isfinite(g) and g)
    assert rounding.array(a, None) is a


def test_the_answers_stay_small(client):
    """Size: a full batch of 120-point series at 24 lags within 8 KB a series at the default digits; a single full
    answer for such a series within 12 KB at 8 digits (about 14.7 KB at the default 13, 16.5 KB at full precision,
    28.9 KB before charts became opt-in)."""
    x = _noise(120, 1)
    assert len(client.post(SINGLE, json={"values": x, "max_lag": 24}).data) <= 15_000
    assert len(client.post(SINGLE, json={"values": x, "max_lag": 24, "digits": 8}).data) <= 12_288
    series = [{"id": f"s-{i}", "values": _noise(120, 100 + i)} for i in range(40)]
    batch = client.post(BATCH, json={"series": series, "max_lag": 24})
    assert len(batch.data) / len(series) <= 8192

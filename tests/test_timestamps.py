"""Timestamps: each spacing and its period, gaps, duplicates, order and time zones."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from .spec_tools import assert_valid

URL = "/v1/diagnostics"


def _values(n: int, seed: int = 5) -> list[float]:
    return np.random.default_rng(seed).standard_normal(n).round(6).tolist()


def _stamps(index: pd.DatetimeIndex) -> list[str]:
    return [t.isoformat() for t in index]


# Spacing -> implied period: options.PERIOD_BY_SPACING (common practice, no source).
SPACINGS = [
    (pd.date_range("2021-01-01", periods=72, freq="h"), "hourly", 24),
    (pd.date_range("2021-01-01", periods=60, freq="D"), "daily", 7),
    (pd.bdate_range("2021-01-04", periods=60), "business-daily", 5),
    (pd.date_range("2019-01-06", periods=120, freq="W-SUN"), "weekly", 52),
    (pd.date_range("2018-01-01", periods=48, freq="MS"), "monthly", 12),
    (pd.date_range("2018-01-31", periods=48, freq="ME"), "monthly", 12),
    (pd.date_range("2010-01-01", periods=40, freq="QS"), "quarterly", 4),
    (pd.date_range("2010-03-31", periods=40, freq="QE"), "quarterly", 4),
    (pd.date_range("1990-01-01", periods=30, freq="YS"), "yearly", None),
]


@pytest.mark.parametrize("index,name,period", SPACINGS, ids=[s[1] + str(i) for i, s in enumerate(SPACINGS)])
def test_each_spacing_implies_its_period(client, index, name, period):
    body = client.post(URL, json={"values": _values(len(index)), "timestamps": _stamps(index)}).get_json()
    assert body["frequency"] == name and body["period"] == period
    assert body["seasonal"]["period_source"] == ("timestamps" if period else None)
    assert body["missing"]["count"] == 0
    assert_valid(body, "Report")


def test_dates_only_and_date_times_both_read(client):
    stamps = [f"2024-05-{d:02d}T08:30:00" for d in range(1, 29)]
    body = client.post(URL, json={"values": _values(28), "timestamps": stamps}).get_json()
    assert body["frequency"] == "daily" and body["period"] == 7


def test_request_period_wins_over_timestamps(client):
    stamps = _stamps(pd.date_range("2018-01-01", periods=48, freq="MS"))
    body = client.post(URL, json={"values": _values(48), "timestamps": stamps, "period": 6}).get_json()
    assert body["period"] == 6 and body["frequency"] == "monthly" and body["seasonal"]["period_source"] == "request"


@pytest.mark.parametrize("tz", ["Europe/Paris", "America/New_York", "Asia/Kolkata"])
def test_zoned_daily_stamps_across_a_dst_change_stay_daily(client, tz):
    # Local midnights around the March change: 23 or 25 hours apart in UTC, one day apart on the calendar.
    index = pd.date_range("2024-02-20", periods=60, freq="D", tz=tz)
    body = client.post(URL, json={"values": _values(60), "timestamps": _stamps(index)}).get_json()
    assert body["frequency"] == "daily" and body["period"] == 7


def test_zoned_hourly_stamps_across_a_dst_change_are_hourly_instants(client):
    index = pd.date_range("2024-10-26", periods=96, freq="h", tz="Europe/Berlin")  # 27 Oct has 25 local hours
    stamps = _stamps(index)
    assert len(set(s[:13] for s in stamps)) < 96  # a local wall-clock hour repeats
    body = client.post(URL, json={"values": _values(96), "timestamps": stamps}).get_json()
    assert body["frequency"] == "hourly" and body["period"] == 24 and body["missing"]["count"] == 0


def test_utc_z_suffix_and_offsets_mean_the_same_instants(client):
    a = [f"2024-01-01T{h:02d}:00:00Z" for h in range(24)]
    b = [f"2024-01-01T{(h + 2) % 24:02d}:00:00+02:00".replace("2024-01-01T0", "2024-01-01T0") for h in range(22)]
    assert client.post(URL, json={"values": _values(24), "timestamps": a}).get_json()["frequency"] == "hourly"
    assert client.post(URL, json={"values": _values(22), "timestamps": b}).get_json()["frequency"] == "hourly"


def test_same_instant_in_two_zones_is_a_duplicate(client):
    stamps = ["2024-01-01T00:00:00Z", "2024-01-01T01:00:00Z", "2024-01-01T02:00:00+01:00", "2024-01-01T03:00:00Z"]
    r = client.post(URL, json={"values": [1, 2, 3, 4], "timestamps": stamps})
    assert r.status_code == 422
    err = r.get_json()["errors"][0]
    assert err["pointer"] == "/timestamps/2" and "duplicate" in err["detail"].lower()
    assert "index 1" in err["detail"]  # names the earlier stamp it repeats


def test_first_duplicate_is_named_even_when_not_adjacent(client):
    stamps = ["2024-01-01", "2024-01-02", "2024-01-03", "2024-01-02", "2024-01-02", "2024-01-04"]
    r = client.post(URL, json={"values": [1, 2, 3, 4, 5, 6], "timestamps": stamps})
    err = r.get_json()["errors"][0]
    assert r.status_code == 422 and err["pointer"] == "/timestamps/3" and "'2024-01-02'" in err["detail"]


def test_out_of_order_stamp_is_named(client):
    stamps = ["2024-01-01", "2024-01-03", "2024-01-02", "2024-01-04"]
    r = client.post(URL, json={"values": [1, 2, 3, 4], "timestamps": stamps})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/timestamps/2"
    assert "earlier" in r.get_json()["errors"][0]["detail"]


def test_mixed_zoned_and_naive_stamps_are_refused(client):
    stamps = ["2024-01-01T00:00:00Z", "2024-01-01T01:00:00Z", "2024-01-01T02:00:00", "2024-01-01T03:00:00Z"]
    r = client.post(URL, json={"values": [1, 2, 3, 4], "timestamps": stamps})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/timestamps/2"
    assert "zone" in r.get_json()["errors"][0]["detail"]


def test_irregular_stamps_warn_and_imply_no_period(client):
    stamps = ["2024-01-01", "2024-01-02", "2024-01-05", "2024-01-17", "2024-02-01", "2024-02-03"]
    body = client.post(URL, json={"values": [1, 3, 2, 5, 4, 6], "timestamps": stamps}).get_json()
    assert body["frequency"] is None and body["period"] is None
    assert [w["code"] for w in body["warnings"]] == ["irregular_timestamps", "short_series"]


GAPPED = [
    (pd.date_range("2018-01-01", periods=48, freq="MS"), [5, 6, 30], "monthly"),
    (pd.date_range("2018-01-31", periods=48, freq="ME"), [1, 20], "monthly"),  # month ends: Feb 28/29 included
    (pd.date_range("2010-01-01", periods=40, freq="QS"), [3, 17], "quarterly"),
    (pd.date_range("2021-01-01", periods=60, freq="D"), [10, 11, 12], "daily"),
    (pd.date_range("2019-01-06", periods=120, freq="W-SUN"), [50], "weekly"),
    (pd.date_range("2021-01-01", periods=72, freq="h"), [2, 40], "hourly"),
    (pd.date_range("2021-01-01", periods=80, freq="15min"), [7], "15min"),
]


@pytest.mark.parametrize("index,holes,name", GAPPED, ids=[g[2] + str(i) for i, g in enumerate(GAPPED)])
def test_gaps_in_regular_stamps_are_missing_observations(client, index, holes, name):
    keep = np.setdiff1d(np.arange(len(index)), holes)
    stamps = [_stamps(index)[i] for i in keep]
    values = _values(len(index))
    sent = [values[i] for i in keep]
    r = client.post(URL, json={"values": sent, "timestamps": stamps})
    assert r.status_code == 422
    err = r.get_json()["errors"][0]
    assert err["pointer"] == f"/timestamps/{holes[0]}" and "skip" in err["detail"]
    body = client.post(URL, json={"values": sent, "timestamps": stamps, "missing": "interpolate"}).get_json()
    assert body["frequency"] == name
    assert body["missing"] | {"note": None} == {
        "method": "interpolate", "count": len(holes), "from_nulls": 0, "from_gaps": len(holes),
        "dropped_at_ends": 0, "interpolated": len(holes), "remaining": 0, "effective_n": None, "note": None}
    assert body["n"] == len(index) and body["n_input"] == len(keep)
    assert_valid(body, "Report")
    # The filled series is the same as sending the full grid with nulls at the holes.
    with_nulls = [None if i in holes else v for i, v in enumerate(values)]
    same = client.post(URL, json={"values": with_nulls, "missing": "interpolate", "period": body["period"],
                                  "max_lag": body["max_lag"]}).get_json()
    assert same["acf"]["values"] == body["acf"]["values"]


def test_sparse_stamps_are_irregular_not_gappy(client):
    # Fewer than half of the daily slots observed: options.MIN_OBSERVED_SHARE.
    index = pd.date_range("2021-01-01", periods=90, freq="D")[::3].delete([4, 9])
    body = client.post(URL, json={"values": _values(len(index)), "timestamps": _stamps(index),
                                  "missing": "pairwise"}).get_json()
    assert body["frequency"] == "3D" and body["missing"]["count"] == 2 and body["period"] is None
    sparse = pd.DatetimeIndex(["2021-01-01", "2021-01-02", "2021-01-09", "2021-01-20", "2021-02-01"])
    body = client.post(URL, json={"values": _values(5), "timestamps": _stamps(sparse)}).get_json()
    assert body["frequency"] is None and body["warnings"][0]["code"] == "irregular_timestamps"


def test_historic_and_far_future_years_are_read(client):
    # Years outside pandas' nanosecond range (1677-2262) are kept: times are held in microseconds.
    stamps = [f"{y}-01-01" for y in range(1500, 1530) if y != 1507]
    body = client.post(URL, json={"values": _values(29), "timestamps": stamps, "missing": "interpolate"}).get_json()
    assert body["frequency"] == "yearly" and body["missing"]["from_gaps"] == 1 and body["n"] == 30
    wide = client.post(URL, json={"values": [1, 3, 2], "timestamps": ["0001-01-01", "5000-06-01", "9999-12-31"]})
    assert wide.status_code == 200 and wide.get_json()["frequency"] is None


def test_stamps_equal_to_the_microsecond_are_duplicates(client):
    stamps = ["2024-01-01T00:00:00.0000001", "2024-01-01T00:00:00.0000002", "2024-01-01T00:00:01"]
    r = client.post(URL, json={"values": [1, 3, 2], "timestamps": stamps})
    assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/timestamps/1"

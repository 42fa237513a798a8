"""lagsight.distributed.diagnose_dask on a local cluster of 2 worker processes: the table of lagsight.diagnose_many.

The data are seeded random series (simulated, not a reference).
"""
from __future__ import annotations

import dask.dataframe as dd
import numpy as np
import pandas as pd
import pytest
from distributed import Client, LocalCluster

import lagsight
import lagsight.distributed as on_dask
from lagsight.api import LagsightError

#: Without a dashboard the scheduler still serves HTTP, on port 8787 unless told otherwise: another cluster on the
#: machine holding that port would make it warn (an error here). Any free port will do.
FREE_HTTP_PORT = {"dashboard_address": "127.0.0.1:0"}


@pytest.fixture(scope="module")
def client():
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                      scheduler_kwargs=FREE_HTTP_PORT) as cluster, Client(cluster) as connected:
        yield connected


def _frame(count: int = 90, seed: int = 0, int_ids: bool = False) -> pd.DataFrame:
    """Invented store series, rows shuffled: noise, AR(1), one constant, one with a missing value, one too short."""
    rng = np.random.default_rng(seed)
    parts = []
    for k in range(count):
        n = 60 + 30 * (k % 3)
        x = rng.standard_normal(n)
        if k % 5 == 1:
            for t in range(1, n):
                x[t] += 0.6 * x[t - 1]
        if k == 3:
            x[:] = 2.5
        if k == 4:
            x[10] = np.nan
        if k == 5:
            x = x[:2]
        key = 1000 + k if int_ids else f"store-{k:03d}"
        parts.append(pd.DataFrame({"store": key, "day": pd.date_range("2023-06-01", periods=len(x), freq="D"),
                                   "step": np.arange(len(x)), "sales": x}))
    return pd.concat(parts, ignore_index=True).sample(frac=1.0, random_state=seed).reset_index(drop=True)


def _same(table: pd.DataFrame, expected: pd.DataFrame) -> None:
    got = table.sort_values("id").reset_index(drop=True)
    want = expected.sort_values("id").reset_index(drop=True)
    got["id"] = got["id"].astype(want["id"].dtype)  # dask holds text ids as its own string dtype
    pd.testing.assert_frame_equal(got, want)


def _split_series(ddf, column: str) -> int:
    """How many series have rows in more than one input partition (the case the shuffle on the id is for)."""
    owners = {}
    for i in range(ddf.npartitions):
        for key in ddf.partitions[i][column].compute().unique():
            owners.setdefault(key, set()).add(i)
    return sum(1 for places in owners.values() if len(places) > 1)


def test_the_dask_table_equals_diagnose_many(client):
    frame = _frame()
    ddf = dd.from_pandas(frame, npartitions=4)
    assert _split_series(ddf, "store") > 50
    expected = lagsight.diagnose_many(frame, id="store", time="day", value="sales")
    table = on_dask.diagnose_dask(ddf, id="store", time="day", value="sales", npartitions=3).compute()
    assert len(table) == 90 and table["error"].notna().sum() == 3
    assert (table["q_value"].dropna() >= table["tail_p_value"].dropna()).all()
    _same(table, expected)


def test_brief_results_integer_ids_and_a_number_time_column(client):
    frame = _frame(60, seed=1, int_ids=True)
    opts = {"detail": "brief", "max_lag": 12, "confidence": 0.9, "missing": "interpolate"}
    expected = lagsight.diagnose_many(frame, id="store", time="step", value="sales", **opts)
    ddf = dd.from_pandas(frame.drop(columns="day"), npartitions=3)
    table = on_dask.diagnose_dask(ddf, id="store", time="step", value="sales", **opts).compute()
    assert table["advice"].isna().all() and table["error"].notna().sum() == 2
    _same(table, expected)


def test_each_partition_is_analysed_once(client, monkeypatch, tmp_path):
    """On the cluster (its own shuffle): the q-value step reuses the analysed partitions, it does not redo them."""
    real, calls = on_dask._partition, tmp_path / "calls"

    def counting(frame, *args):  # defined here, so that it travels to the workers by value
        with open(calls, "a") as fh:
            fh.write(f"{len(frame)}\n")
        return real(frame, *args)

    monkeypatch.setattr(on_dask, "_partition", counting)
    frame = _frame(30, seed=2)
    table = on_dask.diagnose_dask(dd.from_pandas(frame, npartitions=3), id="store", time="day", value="sales").compute()
    sizes = [int(line) for line in calls.read_text().split()]
    assert len(sizes) == 3 and sum(sizes) == len(frame) and table["q_value"].notna().sum() == 27


def test_options_and_columns_are_checked_before_anything_runs():
    ddf = dd.from_pandas(_frame(6), npartitions=2)
    with pytest.raises(LagsightError) as caught:
        on_dask.diagnose_dask(ddf, id="store", time="day", value="sales", confidence=1.5)
    assert [e.pointer for e in caught.value.errors] == ["/confidence"] and caught.value.status == 422
    with pytest.raises(ValueError, match="no value column"):
        on_dask.diagnose_dask(ddf, id="store", time="day")
    text = ddf.assign(day=ddf["day"].astype(str))
    with pytest.raises(ValueError, match="date-times or numbers"):
        on_dask.diagnose_dask(text, id="store", time="day", value="sales")


def test_a_refusal_inside_a_task_comes_back_with_its_problem_details(client):
    """Monte Carlo work over the distinct lengths of one partition past the limit: the batch route's 422."""
    frame = _frame(6, seed=3)
    frame = frame[~frame["store"].isin(["store-003", "store-004", "store-005"])]
    ddf = dd.from_pandas(frame, npartitions=2)
    out = on_dask.diagnose_dask(ddf, id="store", time="day", value="sales", npartitions=1, p_values="monte_carlo",
                                replicates=99, seed=1, limits={"MAX_SIMULATED_VALUES": 99 * 100})
    with pytest.raises(LagsightError) as caught:
        out.compute()
    assert caught.value.status == 422 and [e.pointer for e in caught.value.errors] == ["/replicates"]
    assert "simulated values" in caught.value.detail

"""Many series on Dask: a dask DataFrame in the long format in, a dask DataFrame of per-series results out.

Needs the optional extra ``lagsight[dask]`` (``dask[dataframe]`` and ``distributed``); dask is imported when
:func:`diagnose_dask` is called, so the service itself never needs it.

How it runs (see docs/DASK.md for a real cluster):

1. The rows are shuffled on the series id, so that every series lies whole in one partition (a dask DataFrame
   read from files or made with ``from_pandas`` is split by row position, which can cut a series in two).
2. Each partition goes through the batch route's own steps (:func:`lagsight.api.analyse_long`: the items
   checked and prepared as the batch route does, then the engine a block of equal plans at a time), giving the
   columns of :data:`lagsight.tables.TABLE` without the q-value.
3. The false-discovery q-values need every series' ``tail_p_value``: one task gathers that column from every
   partition (8 bytes per series), ranks it and computes the Benjamini-Hochberg q-values
   (:func:`lagsight.consult.across.q_values`), sorted by p-value; each partition then reads its series'
   q-values from that list. That task's peak is about 100 bytes per series (a hand run on 4 million, not a committed benchmark: 88 beyond
   the 8 of the gathered column), so 100 million series need about 10 GB on one worker. Both steps are one task
   graph: each partition is computed once.

The table equals :func:`lagsight.diagnose_many` on the same rows and options (tests/test_distributed.py checks
it on a local cluster); its rows come in the shuffle's order, not in the order of each id's first row.
"""
from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from lagsight import api, tables
from lagsight.consult import across
from lagsight.problems import Problem


def _partition(frame: pd.DataFrame, id: str, time: str, value: str, shared: dict, limits: dict,
               id_dtype) -> pd.DataFrame:
    """One partition's series (each whole) as table rows; their q-values come later (:func:`_with_q`)."""
    long = tables.LongFrame(frame, id, time, value)
    try:
        rows, _, _, _ = api.analyse_long(long, shared, limits)
    except Problem as problem:
        raise api.LagsightError.of(problem) from None
    return tables.table(rows, [None] * len(rows), id_dtype)


def _analysed_p(part: pd.DataFrame) -> np.ndarray:
    """The tail p-values of a partition's analysed series (the only column the q-values need)."""
    return part["tail_p_value"].to_numpy()[part["error"].isna().to_numpy()]


def _q_lookup(parts: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Every analysed series' tail p-value, sorted, and its q-value across all of them."""
    p = np.concatenate(parts)
    order = np.argsort(p, kind="stable")
    q = np.asarray(across.q_values(p), dtype=np.float64)
    return p[order], q[order]


def _with_q(part: pd.DataFrame, lookup: tuple[np.ndarray, np.ndarray]) -> pd.DataFrame:
    """The partition with its q-values: the q-value of a p-value is the same for every series that has it
    (Benjamini-Hochberg gives tied p-values one q-value), so it is read off the sorted list."""
    p_sorted, q_sorted = lookup
    analysed = part["error"].isna().to_numpy()
    q = np.full(len(part), np.nan)
    if analysed.any():
        q[analysed] = q_sorted[np.searchsorted(p_sorted, part["tail_p_value"].to_numpy()[analysed])]
    part = part.copy()
    part["q_value"] = q
    return part


def diagnose_dask(ddf, id: str = "id", time: str = "time", value: str = "value", *, npartitions: int | None = None,
                  limits: Mapping | None = None, **options):
    """Diagnose every series of a dask DataFrame in the long format: a lazy dask DataFrame of one row per series.

    Parameters
    ----------
    ddf : dask.dataframe.DataFrame
        One row per observation, as for :func:`lagsight.diagnose_many`.
    id, time, value : str
        The columns of the series id, the time and the value. ``time`` must be a date-time column (it then gives
        the series' timestamps, as in diagnose_many) or a number column: the shuffle does not keep row order.
    npartitions : int, optional
        Partitions after the shuffle on the id (default: as many as ``ddf`` has).
    limits, **options
        As for :func:`lagsight.diagnose_many` (the batch's shared options; ``reports`` is not offered here).

    Returns
    -------
    dask.dataframe.DataFrame
        The columns of :data:`lagsight.tables.TABLE` (meta declared), lazy: ``.compute()``, ``.to_parquet(...)``
        or ``.persist()`` runs it on the current scheduler (a ``distributed.Client`` when one is active).

    Raises
    ------
    LagsightError
        At once for an invalid shared option; when computing, for a batch-wide refusal such as too many
        simulated values in one partition.
    ValueError
        For a missing column or a time column that cannot order the rows.
    """
    import dask
    import dask.dataframe as dd

    for role, column in (("id", id), ("time", time), ("value", value)):
        if column not in ddf.columns:
            raise ValueError(f"the frame has no {role} column {column!r}; its columns are {list(ddf.columns)}")
    kind = ddf[time].dtype
    if not (pd.api.types.is_datetime64_any_dtype(kind)
            or (pd.api.types.is_numeric_dtype(kind) and not pd.api.types.is_bool_dtype(kind))):
        raise ValueError(f"the time column {time!r} ({kind}) must hold date-times or numbers: the shuffle on the id "
                         "does not keep the rows' order, so the time column must give it")
    if "reports" in options:
        raise TypeError("diagnose_dask gives the table only; use lagsight.diagnose_many for full reports")
    cfg = api.limits_with(limits)
    try:
        shared = api.batch_options(1, options, cfg)  # checked once here, before any task runs
    except Problem as problem:
        raise api.LagsightError.of(problem) from None
    id_dtype = ddf[id].dtype
    meta = tables.table([], [], id_dtype)
    grouped = ddf.shuffle(on=id, npartitions=npartitions or ddf.npartitions)
    rows = grouped.map_partitions(_partition, id, time, value, shared, cfg, id_dtype, meta=meta,
                                  clear_divisions=True)
    # The same task objects feed both steps, so that each partition is analysed once (two dask DataFrame
    # expressions over `rows` would be optimised apart, and their partitions computed twice).
    parts = rows.to_delayed()
    lookup = dask.delayed(_q_lookup)([dask.delayed(_analysed_p)(part) for part in parts])
    return dd.from_delayed([dask.delayed(_with_q)(part, lookup) for part in parts], meta=meta, verify_meta=False)

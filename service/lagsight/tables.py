"""Tables in and out of the Python API: a long table read as series, and one row of results per series.

A long table has one row per observation (series id, time, value); :class:`LongFrame` reads it as the items of a
batch body, as JSON would carry them (None where a value is missing, ISO 8601 text for date-times). The results
come back as :data:`TABLE`'s columns, one row per series, from each series' result of the batch route.
"""
from __future__ import annotations

import math

import numpy as np
import pandas as pd

#: The columns of diagnose_many's table and their dtypes (``id`` keeps the frame's id dtype).
TABLE = {
    "id": None,
    "n": "Int64",  # usable values analysed
    "white_noise": "boolean",  # the verdict (NA: undetermined, or an error)
    "p_value": "float64",  # verdict.p_value
    "tail_p_value": "float64",  # verdict.tail_p_value: the p-value the q-values adjust
    "structure": "string",  # the first kind of structure named (verdict.structure[0])
    "advice": "string",  # the code of the first advice item (full detail only)
    "ljung_box_lag": "Int64",  # the short lag of the portmanteau tests
    "ljung_box_p": "float64",  # the Ljung-Box p-value at that lag
    "q_value": "float64",  # Benjamini-Hochberg q-value across every series analysed (summary.false_discovery)
    "error": "string",  # why the series was not analysed: each field error, its pointer relative to the series
}


def missing_to_none(values: list) -> list:
    """NaN, pandas.NA and NaT mark a missing value, as null does in a JSON body."""
    return [None if v is None or v is pd.NA or v is pd.NaT or (isinstance(v, float) and math.isnan(v)) else v
            for v in values]


def value_list(values) -> list:
    """Values as a JSON body would hold them: numbers, None where missing; other items left for the checks."""
    if isinstance(values, (pd.Series, pd.Index)):
        kind = values.dtype.kind
        if kind in "iuf" and not pd.api.types.is_bool_dtype(values.dtype):
            return missing_to_none(values.to_numpy(dtype=np.float64, na_value=np.nan).tolist())
        return missing_to_none(values.tolist())
    if isinstance(values, np.ndarray):
        return missing_to_none(values.tolist())
    if isinstance(values, (list, tuple)):
        return missing_to_none(list(values))
    raise TypeError(f"values must be a list, a tuple, a NumPy array or a pandas Series, not {type(values).__name__}")


def iso_labels(stamps) -> np.ndarray:
    """ISO 8601 text of each stamp (an object array): dates alone when every stamp is at midnight, an offset when
    the stamps carry a zone, microseconds only when some stamp has them. NaT becomes "NaT" (which the checks refuse)."""
    index = pd.DatetimeIndex(stamps)
    if index.tz is not None:
        return np.array([t.isoformat() if t is not pd.NaT else "NaT" for t in index], dtype=object)
    if (index[index.notna()] == index[index.notna()].normalize()).all():
        fmt = "%Y-%m-%d"
    elif (index[index.notna()].microsecond == 0).all():
        fmt = "%Y-%m-%dT%H:%M:%S"
    else:
        fmt = "%Y-%m-%dT%H:%M:%S.%f"
    return np.array(["NaT" if s is None or s is pd.NaT or (isinstance(s, float) and math.isnan(s)) else s
                     for s in index.strftime(fmt)], dtype=object)


class LongFrame:
    """A long table (one row per observation) read as a list of series, in order of each id's first row.

    Each series' rows are ordered by ``time`` when it is a date-time or number column (rows of one series
    keep the frame's order otherwise). A date-time column becomes each series' ``timestamps`` (ISO 8601 text);
    a text column is sent as ``timestamps`` as it is, in the frame's row order; a number column only orders.
    """

    def __init__(self, frame: pd.DataFrame, id: str = "id", time: str | None = "time", value: str = "value"):
        for role, column in (("id", id), ("time", time), ("value", value)):
            if column is not None and column not in frame.columns:
                raise ValueError(f"the frame has no {role} column {column!r}; its columns are {list(frame.columns)}")
        codes, uniques = pd.factorize(frame[id], sort=False)
        if (codes < 0).any():
            missing = int((codes < 0).sum())
            raise ValueError(f"{missing} {'row has' if missing == 1 else 'rows have'} no {id}: every row must name its "
                             "series")
        self.id_dtype = frame[id].dtype
        self.ids = uniques.tolist()
        stamps = None
        if time is not None:
            column = frame[time]
            if pd.api.types.is_datetime64_any_dtype(column.dtype) or isinstance(column.dtype, pd.PeriodDtype):
                if isinstance(column.dtype, pd.PeriodDtype):
                    column = column.dt.to_timestamp()
                stamp_codes, stamp_values = pd.factorize(column, sort=False)
                labels = np.append(iso_labels(stamp_values), "NaT")  # code -1 (NaT) takes the last one
                order = np.lexsort((column.to_numpy(dtype="datetime64[us]").view("int64"), codes))
                stamps = labels[stamp_codes[order]]
            elif pd.api.types.is_numeric_dtype(column.dtype) and not pd.api.types.is_bool_dtype(column.dtype):
                order = np.lexsort((column.to_numpy(dtype=np.float64, na_value=np.nan), codes))
            else:
                order = np.argsort(codes, kind="stable")
                stamps = column.to_numpy(dtype=object)[order]
        else:
            order = np.argsort(codes, kind="stable")
        column = frame[value]
        if pd.api.types.is_numeric_dtype(column.dtype) and not pd.api.types.is_bool_dtype(column.dtype):
            self.values = column.to_numpy(dtype=np.float64, na_value=np.nan)[order]
            gaps = np.isnan(self.values)
        else:
            self.values = column.to_numpy(dtype=object)[order]
            gaps = np.ones(len(self.values), dtype=bool)  # checked item by item
        self.stamps = stamps
        counts = np.bincount(codes, minlength=len(self.ids))
        self.starts = np.concatenate([[0], np.cumsum(counts)]).tolist()
        self.gappy = (np.add.reduceat(gaps, self.starts[:-1]) > 0).tolist() if len(self.ids) else []

    def __len__(self) -> int:
        return len(self.ids)

    def items(self, first: int, last: int) -> list[dict]:
        """Series ``first`` to ``last - 1`` as the items of a batch body."""
        out = []
        for k in range(first, last):
            a, b = self.starts[k], self.starts[k + 1]
            values = self.values[a:b].tolist()
            item = {"id": self.ids[k], "values": missing_to_none(values) if self.gappy[k] else values}
            if self.stamps is not None:
                item["timestamps"] = self.stamps[a:b].tolist()
            out.append(item)
        return out


def _error_text(error: dict) -> str:
    fields = error.get("errors") or []
    if not fields:
        return error["detail"]
    parts = []
    for e in fields:
        pointer = e["pointer"]
        if pointer.startswith("/series/"):
            pointer = pointer[len("/series/"):].partition("/")[2]
            pointer = "/" + pointer if pointer else ""
        parts.append(f"{pointer}: {e['detail']}" if pointer else e["detail"])
    return "; ".join(parts)


def result_row(result: dict) -> tuple:
    """id, n, white_noise, p_value, tail_p_value, structure, advice, ljung_box_lag, ljung_box_p, error."""
    if "error" in result:
        return (result["id"], None, None, None, None, None, None, None, None, _error_text(result["error"]))
    verdict = result["verdict"]
    advice = result.get("advice")
    short = next((t for t in result["tests"] if t["name"] == "ljung_box"), None)
    return (result["id"], result["n"], verdict["white_noise"], verdict["p_value"], verdict["tail_p_value"],
            verdict["structure"][0] if verdict["structure"] else None, advice[0]["code"] if advice else None,
            None if short is None else short["lag"], None if short is None else short["p_value"], None)


def table(rows: list[tuple], q: list, id_dtype) -> pd.DataFrame:
    """The per-series table (:data:`TABLE`) from :func:`result_row` tuples and the q-values."""
    columns = list(zip(*rows)) if rows else [()] * 10
    data = {}
    for name, values in zip((c for c in TABLE if c != "q_value"), columns):
        dtype = TABLE[name]
        if name == "id":
            data[name] = pd.array(list(values), dtype=id_dtype)
        elif dtype == "float64":
            data[name] = np.array([np.nan if v is None else v for v in values], dtype=np.float64)
        else:
            data[name] = pd.array(list(values), dtype=dtype)
    data["q_value"] = np.array([np.nan if v is None else v for v in q], dtype=np.float64)
    return pd.DataFrame(data, columns=list(TABLE))

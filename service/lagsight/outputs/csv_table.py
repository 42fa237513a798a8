"""The report as a flat table per lag, for spreadsheets (``Accept: text/csv`` or ``format=csv``).

Columns: lag, acf, pacf, lower, upper, outside, seasonal, pacf_lower, pacf_upper,
pacf_outside. ``lower``/``upper`` are the autocorrelation band at that lag and
``outside`` says whether the autocorrelation leaves it; the pacf_ columns do the same
for the partial autocorrelation. Booleans are ``true``/``false``; an undefined number
is an empty cell. Comma-separated, point decimals, CRLF line ends (RFC 4180), UTF-8.
"""
from __future__ import annotations

import csv
import io

COLUMNS = ("lag", "acf", "pacf", "lower", "upper", "outside", "seasonal", "pacf_lower", "pacf_upper", "pacf_outside")


def _cell(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    return repr(v) if isinstance(v, float) else str(v)


def correlogram_table(report: dict) -> str:
    acf, pacf = report["acf"], report["pacf"]
    out_acf, out_pacf = set(acf["outside"]), set(pacf["outside"])
    period = report["period"]
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\r\n")
    writer.writerow(COLUMNS)
    for i, lag in enumerate(acf["lags"]):
        writer.writerow([_cell(v) for v in (
            lag, acf["values"][i], pacf["values"][i], acf["lower"][i], acf["upper"][i], lag in out_acf,
            bool(period) and lag % period == 0, pacf["lower"][i], pacf["upper"][i], lag in out_pacf)])
    return buf.getvalue()

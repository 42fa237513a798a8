"""text/csv bodies: what spreadsheets and databases export, read into the fields of one series.

Dialects read (query parameters, each optional)
-----------------------------------------------
- ``delimiter``: ``,`` ``;`` or a tab (also spelt ``comma``, ``semicolon``, ``tab``).
  By default the first line decides: a tab if it has one, else a semicolon, else a comma.
- ``decimal``: ``.`` or ``,`` (also ``point``, ``comma``). By default the mark under which
  every value cell is a number; 422 when both marks read every cell but give different
  numbers (``1,234``). Thousands separators are read by the one rule for numbers written
  as text (``numbers.py``), shared with the query string and the page.
- ``header``: ``true`` or ``false``. By default the first line is a header when none of
  its cells is a number or an ISO 8601 date.
- ``column``: the value column, by header name or 0-based index. By default the only
  column other than the time column.
- ``time_column``: the timestamp column, by name or 0-based index, or ``none``. By default
  the first column when there are two or more and its first cell is an ISO 8601 date.
- UTF-8 with or without a byte-order mark; LF or CRLF line ends; fields quoted with ``"``.
- Empty cells and ``NA``, ``N/A``, ``NaN``, ``null``, ``None``, ``#N/A``, ``-`` (any case)
  are missing values. Blank lines at the end are ignored.

A file that cannot be read as a table (not UTF-8, a NUL byte, an unclosed quote, a row
too short for the chosen columns) is a 400 ``malformed-csv``; a cell that is not a number
or a date is a 422 pointing at ``/values/<i>`` or ``/timestamps/<i>``. Both give the
1-based line and column (field number) in ``errors``.
"""
from __future__ import annotations

import csv
import io
import re
from collections.abc import Mapping

import numpy as np

from lagsight import options
from lagsight.inputs import numbers
from lagsight.problems import FieldError, Problem, counted, did_you_mean

_ISO_DATE = re.compile(r"^\d{4}-\d{2}-\d{2}")
_MAX_LISTED = 10
csv.field_size_limit(1 << 20)


def _malformed(detail: str, line: int | None = None, column: int | None = None) -> Problem:
    where = f"Line {line}" + (f", column {column}" if column else "") + ": " if line else ""
    return Problem("malformed-csv", where + detail, [FieldError("", where + detail, line, column)])


def _decode(body: bytes) -> str:
    try:
        text = body.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        line = body.count(b"\n", 0, err.start) + 1
        column = err.start - (body.rfind(b"\n", 0, err.start) + 1) + 1
        raise _malformed(f"byte 0x{body[err.start]:02x} is not UTF-8 (character {column} of the line); "
                         "save the file as UTF-8.", line) from None
    nul = text.find("\0")
    if nul >= 0:
        raise _malformed("the file contains a NUL character; is it a spreadsheet's binary format rather than CSV?",
                         text.count("\n", 0, nul) + 1)
    if not text.strip():
        raise _malformed("The body is empty; send a CSV table with at least a value column.")
    return text


def _named_choice(args: Mapping[str, str], name: str, table: dict, what: str, allowed: str) -> str | None:
    """The query parameter ``name`` as one of ``table``'s characters (given by name or as the character), or None."""
    given = args.get(name)
    if given is None:
        return None
    chosen = table.get(given.lower(), given)
    if chosen not in table.values():
        raise Problem("invalid-content", f"Unknown {what}.", [FieldError(
            f"/{name}", f"Must be {allowed}, got {given!r}.{did_you_mean(given, table)}")])
    return chosen


def _delimiter(args: Mapping[str, str], text: str) -> str:
    chosen = _named_choice(args, "delimiter", options.CSV_DELIMITERS, "delimiter",
                           "',', ';' or a tab (or comma, semicolon, tab)")
    if chosen is not None:
        return chosen
    first = text.lstrip("\r\n").split("\n", 1)[0]
    for candidate in ("\t", ";", ","):
        if candidate in first:
            return candidate
    return ","


def _rows(text: str, delimiter: str) -> tuple[list[list[str]], list[int] | None]:
    """The rows, and the line each starts on (None when row i is line i + 1: no quote can span lines)."""
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, quotechar='"', strict=True)
    lines: list[int] | None = None
    rows: list[list[str]] = []
    try:
        if '"' not in text:
            rows = list(reader)
        else:
            lines, line = [], 1
            for row in reader:
                rows.append(row)
                lines.append(line)
                line = reader.line_num + 1
    except csv.Error as err:
        raise _malformed(f"{err}; check the quotes on this line.", reader.line_num if lines is None else line) from None
    while rows and not any(cell.strip() for cell in rows[-1]):
        rows.pop()
    return rows, (lines[: len(rows)] if lines is not None else None)


def _is_number(cell: str) -> bool:
    """A number (not a missing value) under either decimal mark."""
    if cell.strip(numbers.SPACE).lower() in options.CSV_MISSING_TOKENS:
        return False
    return numbers.reads(cell, ".") or numbers.reads(cell, ",")


def _pick(spec: str | None, header: list[str] | None, width: int, param: str) -> int | None:
    if spec is None:
        return None
    if header is not None:
        names = [h.strip() for h in header]
        if spec in names:
            return names.index(spec)
        folded = [h.casefold() for h in names]
        if spec.strip().casefold() in folded:
            return folded.index(spec.strip().casefold())
    if spec.strip().isascii() and spec.strip().isdigit() and int(spec) < width:  # not "³": isdigit but not int
        return int(spec)
    listing = ", ".join(repr(h) for h in header) if header is not None else f"indexes 0 to {width - 1}"
    raise Problem("invalid-content", f"No column {spec!r} in the file.", [FieldError(
        f"/{param}", f"No column {spec!r}: the file has {counted(width, 'column', 'columns')} ({listing}); give a "
                     f"name or a 0-based index.{did_you_mean(spec, header or ())}")])


def _flag(args: Mapping[str, str], name: str) -> bool | None:
    raw = args.get(name)
    if raw is None or raw.lower() == "auto":
        return None
    if raw.lower() in ("true", "false"):
        return raw.lower() == "true"
    raise Problem("invalid-content", f"Invalid {name}.", [FieldError(
        f"/{name}", f"Must be true, false or auto, got {raw!r}.{did_you_mean(raw, ('true', 'false', 'auto'))}")])


def read_series(body: bytes, args: Mapping[str, str]) -> dict:
    """Read a CSV body into ``values`` (floats, None for missing) and ``timestamps`` (or None)."""
    text = _decode(body)
    delimiter = _delimiter(args, text)
    rows, row_lines = _rows(text, delimiter)
    header_flag = _flag(args, "header")
    first = rows[0] if rows else []
    if header_flag is None:
        header_flag = bool(first) and not any(_is_number(c.strip()) or _ISO_DATE.match(c.strip()) for c in first)
    header = [c.strip() for c in first] if header_flag else None
    skip = 1 if header_flag else 0
    data = rows[skip:]
    lines = row_lines[skip:] if row_lines is not None else list(range(skip + 1, skip + 1 + len(data)))
    width = len(header) if header is not None else max(map(len, data), default=1)
    time_spec = args.get("time_column")
    if time_spec is not None and time_spec.strip().lower() == "none":
        tcol = None
    elif time_spec is not None:
        tcol = _pick(time_spec, header, width, "time_column")
    else:
        sample = next((r for r in data if r), [])
        tcol = 0 if width >= 2 and sample and _ISO_DATE.match(sample[0].strip()) else None
    vcol = _pick(args.get("column"), header, width, "column")
    if vcol is None:
        others = [i for i in range(width) if i != tcol]
        if len(others) != 1:
            names = ", ".join(repr(h) for h in header) if header is not None else counted(width, "column", "columns")
            raise Problem("invalid-content", "Choose the value column.", [FieldError(
                "/column", f"The file has {counted(width, 'column', 'columns')} ({names}); choose the value column "
                           "with column=<name or "
                           "0-based index>.")])
        vcol = others[0]
    if vcol == tcol:
        raise Problem("invalid-content", "The value and time columns are the same.",
                      [FieldError("/column", f"column and time_column name the same column ({vcol}).")])
    need = max(vcol, tcol if tcol is not None else 0) + 1
    if width == 1:
        data = [r if r else [""] for r in data]  # a blank line in a one-column file is a missing value
    sizes = np.fromiter(map(len, data), dtype=np.int64, count=len(data))
    short = np.flatnonzero(sizes < need)
    if short.size:
        i = int(short[0])
        raise _malformed(f"the row has {counted(int(sizes[i]), 'field', 'fields')} but column {need} is needed"
                         + (f" (the header has {width})" if header is not None else "")
                         + f"; is the delimiter {delimiter!r} right?", lines[i])
    if header is not None:
        for i in np.flatnonzero(sizes > width).tolist():
            if any(c.strip() for c in data[i][width:]):
                raise _malformed(f"the row has {int(sizes[i])} fields but the header has {width}; a decimal comma "
                                 "in a comma-separated file must be quoted (or use ';' between fields).", lines[i],
                                 width + 1)
    values = _numbers([r[vcol] for r in data], lines, args, vcol + 1)
    out = {"values": values, "_value_lines": lines, "_value_column": vcol + 1}
    if tcol is not None:
        stamps = [r[tcol].strip() for r in data]
        if not all(stamps):
            i = stamps.index("")
            raise Problem("invalid-content", "A timestamp is empty.", [FieldError(
                f"/timestamps/{i}", f"Line {lines[i]}, column {tcol + 1}: the timestamp is empty.", lines[i],
                tcol + 1)])
        out["timestamps"] = stamps
        out["_stamp_lines"] = lines
        out["_stamp_column"] = tcol + 1
    if header is not None and "name" not in args:
        out["name"] = header[vcol][:200] or None
    return out


def _plain(x: float) -> str:
    return f"{x:.15g}"


def _numbers(cells: list[str], lines: list[int], args: Mapping[str, str], column: int) -> list:
    """The value cells as floats (None for missing), read with the decimal mark given or the one the cells allow."""
    given = _named_choice(args, "decimal", options.CSV_DECIMALS, "decimal mark", "'.' or ',' (or point, comma)")
    read = numbers.read_column(cells, given, _MAX_LISTED)
    if read.ambiguous is not None:
        i = read.ambiguous
        cell = cells[i].strip(numbers.SPACE)
        point, comma = _plain(numbers.read(cell, ".")), _plain(numbers.read(cell, ","))
        detail = (f"Line {lines[i]}, column {column}: {cell[:40]!r} is {point} with a decimal point and {comma} "
                  "with a decimal comma, and every value cell reads "
                  "either way; give decimal=point or decimal=comma.")
        raise Problem("invalid-content", "The decimal mark of the value column is ambiguous; see errors.",
                      [FieldError("/decimal", detail, lines[i], column)])
    if not read.bad:
        return read.values
    other = "," if read.mark == "." else "."
    errors = []
    for i in read.bad:
        cell = cells[i].strip(numbers.SPACE)
        mark, other_name = numbers.MARK_NAMES[read.mark], numbers.MARK_NAMES[other]
        hint = (f" (it reads as a number with a decimal {other_name}, but the column's decimal mark is the {mark})"
                if numbers.reads(cell, other) else f" with a decimal {mark}" if "," in cell or "." in cell else "")
        errors.append(FieldError(f"/values/{i}", f"Line {lines[i]}, column {column}: {cell[:40]!r} is not a finite "
                                                 f"number{hint}.", lines[i], column))
    said = ("1 cell of the value column is not a number" if read.n_bad == 1
            else f"{read.n_bad} cells of the value column are not numbers")
    raise Problem("invalid-content", f"{said}; see errors.", errors)

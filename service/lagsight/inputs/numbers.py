"""Numbers written as text: one rule for CSV cells, query strings and the page.

The page (``web/static/reading.js``) holds the same patterns, character for character;
``tests/test_numbers.py`` checks that they are equal and runs one table of cases through
both readers.

The rule
--------
- A number is an optional sign (``+``, ``-`` or the minus sign U+2212), digits, an optional
  decimal part after the decimal mark, and an optional exponent (``e`` or ``E``, an optional
  sign, digits): ``12``, ``-0.5``, ``.5``, ``3.``, ``1.5e-3``. Only the digits 0 to 9.
- The digits before the decimal mark may be grouped by thousands, with one separator used
  throughout the number: the other mark (a comma when the decimal mark is a point, a point
  when it is a comma), a space, a no-break space (U+00A0, U+202F) or an apostrophe (``'`` or
  U+2019). The first group has 1 to 3 digits and does not start with 0; every other group has
  exactly 3; a grouped number has no exponent. So ``1,234.5``, ``1.234,5``, ``1 234,5`` and
  ``1'234.5`` are read; ``1,23.4``, ``1.234.5`` and ``1,234 567`` are not.
- Spaces, tabs and no-break spaces at either end are ignored. Empty text and ``NA``, ``N/A``,
  ``NaN``, ``null``, ``None``, ``#N/A``, ``-`` (any case) are missing values.
- Anything else is not a number: ``inf``, hexadecimal, underscores, other scripts' digits, a
  value too large for a double.

Which decimal mark, when not given: a column (every value cell of a CSV file, every item of a
paste) is read with the mark under which every cell is a number. When both marks read every
cell and some cell changes with the mark (``1,234`` is 1234 with a decimal point and 1.234 with
a decimal comma; ``1.234`` the other way round) the column is ambiguous: the service answers
422 asking for ``decimal=``, and the page asks. When neither reads every cell, the mark that
reads more cells is used to name the cells that are not numbers.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

import numpy as np

from lagsight import options

MARKS = (".", ",")
MARK_NAMES = {".": "point", ",": "comma"}
#: Stripped from both ends of a cell.
SPACE = " \t\r\n\u00a0\u202f"
SIGNS = "+-\u2212"
# The patterns, per decimal mark; reading.js has the same strings (tests/test_numbers.py compares them).
PLAIN = {
    ".": r"^(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?$",
    ",": r"^(?:[0-9]+(?:,[0-9]*)?|,[0-9]+)(?:[eE][+-]?[0-9]+)?$",
}
GROUPED = {
    ".": r"^[1-9][0-9]{0,2}([, \u00a0\u202f'\u2019])[0-9]{3}(?:\1[0-9]{3})*(?:\.[0-9]*)?$",
    ",": r"^[1-9][0-9]{0,2}([. \u00a0\u202f'\u2019])[0-9]{3}(?:\1[0-9]{3})*(?:,[0-9]*)?$",
}
_PLAIN = {mark: re.compile(p) for mark, p in PLAIN.items()}
_GROUPED = {mark: re.compile(p) for mark, p in GROUPED.items()}
_UNGROUP = re.compile("[,. \u00a0\u202f'\u2019]")
# Text made only of these characters is a plain number exactly when float() reads it (tests check it).
_FAST = {".": re.compile(r"[0-9eE+\-.\n]*"), ",": re.compile(r"[0-9eE+\-,\n]*")}
_MISSING = frozenset(options.CSV_MISSING_TOKENS)


def read(text: str, mark: str) -> float | None:
    """The number ``text`` stands for with decimal mark ``mark``, or None when it is a missing value.

    Raises ValueError (with the reason) when it is not a number under the rule.
    """
    s = text.strip(SPACE)
    if s.lower() in _MISSING:
        return None
    sign = 1.0
    if s and s[0] in SIGNS:
        sign = -1.0 if s[0] != "+" else 1.0
        s = s[1:]
    if _PLAIN[mark].match(s):
        digits = s.replace(",", ".") if mark == "," else s
    elif _GROUPED[mark].match(s):
        whole, _, frac = s.partition(mark)
        digits = _UNGROUP.sub("", whole) + "." + frac
    else:
        raise ValueError("is not a number")
    number = sign * float(digits)
    if not math.isfinite(number):
        raise ValueError("is too large")
    return number


def reads(text: str, mark: str) -> bool:
    """True when ``text`` is a number or a missing value under ``mark``."""
    try:
        read(text, mark)
        return True
    except ValueError:
        return False


@dataclass
class Column:
    """A column of cells read with one decimal mark."""

    values: list  # floats, None for missing (the cells that are not numbers are None too)
    mark: str
    bad: list[int] = field(default_factory=list)  # indexes of cells that are not numbers, at most `limit`
    n_bad: int = 0
    ambiguous: int | None = None  # the first cell that changes with the mark, when the mark was not given


def _fast(cells: list[str], mark: str, joined: str) -> list | None:
    """Plain cells (digits, one mark, exponents) converted in one step, or None when the cells need the full rule."""
    if not _FAST[mark].fullmatch(joined) or (mark == "," and "." in joined):
        return None
    try:
        array = np.array(cells if mark == "." else [c.replace(",", ".") for c in cells], dtype=np.float64)
    except ValueError:
        return None
    return array.tolist() if np.isfinite(array).all() else None


def _read_all(cells: list[str], mark: str, joined: str, limit: int, stop: bool = False) -> Column:
    fast = _fast(cells, mark, joined)
    if fast is not None:
        return Column(fast, mark)
    out = Column([], mark)
    for i, cell in enumerate(cells):
        try:
            out.values.append(read(cell, mark))
        except ValueError:
            out.values.append(None)
            out.n_bad += 1
            if len(out.bad) < limit:
                out.bad.append(i)
            if stop:
                break
    return out


def read_column(cells: list[str], mark: str | None = None, limit: int = 10) -> Column:
    """Read every cell with ``mark``, or with the mark the rule picks when it is None (see the module's text)."""
    joined = "\n".join(cells)
    if mark is not None or ("," not in joined and "." not in joined):
        return _read_all(cells, mark or ".", joined, limit)
    point = _read_all(cells, ".", joined, limit, stop=True)
    comma = _read_all(cells, ",", joined, limit, stop=True)
    if not point.n_bad and not comma.n_bad:
        if point.values != comma.values:
            point.ambiguous = next(i for i, (a, b) in enumerate(zip(point.values, comma.values)) if a != b)
        return point
    if not point.n_bad or not comma.n_bad:
        return point if not point.n_bad else comma
    point, comma = _read_all(cells, ".", joined, limit), _read_all(cells, ",", joined, limit)
    return comma if comma.n_bad < point.n_bad else point

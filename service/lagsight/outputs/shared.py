"""Values the same for every series of a batch, said once: the ``shared`` block of a full batch answer.

A batch of series of one length and options repeats, in every full report, the lags, the band's
limits (when its width depends only on the length), the periodogram's frequencies and band, the
tests' meanings and methods and the cautions that always apply. :func:`hoist` moves each such
value that is equal in every analysed result into ``shared`` and removes it from the results:

- an object field listed in :data:`PATHS` (``acf.lags``, ``band``, ``periodogram.frequencies``, ...),
  when every result holds the same value;
- ``tests``: per position, the ``meaning`` and ``method`` of the entry at that position, when every
  result has the same test names and lags and those values agree (``shared.tests[i]`` completes
  ``tests[i]``);
- ``cautions``: the cautions every result opens with (the ones that always apply; each result keeps the
  rest, in order).

A series' whole report is its result with ``shared`` put back: the keys of an object, the entry at
the same position of ``tests``, and ``shared.cautions`` before the result's own cautions. Results
that are errors are left alone; with no analysed result ``shared`` is empty.
"""
from __future__ import annotations

#: Object fields moved up when equal in every result, in the order ``shared`` lists them.
PATHS = (
    ("band",), ("p_values",), ("transform",), ("missing",),
    ("acf", "lags"), ("acf", "lower"), ("acf", "upper"), ("acf", "centre"), ("acf", "standard_error"),
    ("pacf", "lags"), ("pacf", "lower"), ("pacf", "upper"), ("pacf", "centre"), ("pacf", "standard_error"),
    ("seasonal", "period_source"), ("seasonal", "note"),
    ("periodogram", "frequencies"), ("periodogram", "lower"), ("periodogram", "upper"), ("periodogram", "binned"),
)
#: Keys of each test entry moved up when equal at the same position in every result.
TEST_KEYS = ("meaning", "method")  # (read by _hoist_tests in this order)


def _equal_at(reports: list[dict], path: tuple[str, ...]):
    """(True, value) when every report holds the same value at ``path``, else (False, None)."""
    head, *rest = path
    try:
        if rest:
            values = [r[head][rest[0]] for r in reports]
        else:
            values = [r[head] for r in reports]
    except (KeyError, TypeError):
        return False, None
    first = values[0]
    return all(v == first for v in values), first


def hoist(results: list[dict | None]) -> dict:
    """Move the values equal across every analysed result into the returned ``shared`` block (in place)."""
    reports = [r for r in results if r is not None and "error" not in r]
    shared: dict = {}
    if not reports:
        return shared
    for path in PATHS:
        same, value = _equal_at(reports, path)
        if not same:
            continue
        if len(path) == 1:
            shared[path[0]] = value
            for r in reports:
                del r[path[0]]
        else:
            shared.setdefault(path[0], {})[path[1]] = value
            for r in reports:
                del r[path[0]][path[1]]
    tests = _hoist_tests(reports)
    if tests is not None:
        shared["tests"] = tests
    common = _common_cautions(reports)
    if common:
        shared["cautions"] = common
        for r in reports:
            del r["cautions"][:len(common)]
    return shared


def _hoist_tests(reports: list[dict]) -> list[dict] | None:
    first = [(t["name"], t["lag"], t["meaning"], t["method"]) for t in reports[0]["tests"]]
    if not first:
        return None
    for r in reports[1:]:
        if [(t["name"], t["lag"], t["meaning"], t["method"]) for t in r["tests"]] != first:
            return None
    for r in reports:
        for t in r["tests"]:
            del t["meaning"], t["method"]
    return [{"meaning": meaning, "method": method} for _, _, meaning, method in first]


def _common_cautions(reports: list[dict]) -> list[str]:
    """The longest run of cautions every result opens with (the ones that always apply come first), so
    that ``shared.cautions`` followed by a result's own gives its cautions in their order."""
    common = list(reports[0]["cautions"])
    for r in reports[1:]:
        if not common:
            break
        own = r["cautions"]
        k = 0
        while k < len(common) and k < len(own) and own[k] == common[k]:
            k += 1
        del common[k:]
    return common


def merged(result: dict, shared: dict) -> dict:
    """A result with the ``shared`` block put back: the series' whole report (a new dict)."""
    out = dict(result)
    for key, value in shared.items():
        if key == "tests":
            out["tests"] = [{**t, **extra} for t, extra in zip(result["tests"], value)]
        elif key == "cautions":
            out["cautions"] = [*value, *result["cautions"]]
        elif isinstance(value, dict) and key in result and isinstance(result[key], dict):
            out[key] = {**result[key], **value}
        else:
            out[key] = value
    return out

"""Values the series of a batch have in common, said once: the ``shared`` block of a full batch answer.

A batch of series of one length and options repeats, in every full report, the lags, the band's
limits (when its width depends only on the length), the periodogram's frequencies and band, the
general cautions and the tests' meanings and methods. The ``shared`` block holds these values as the batch's first analysed
series has them (:func:`template`), and every result leaves out each of them that it holds equal
(:func:`strip`):

- an object field listed in :data:`PATHS` (``acf.lags``, ``band``, ``periodogram.frequencies``, ...);
- per position in ``tests``, the entry's ``meaning`` and ``method`` (``shared.tests[i]``).

A result whose value differs (another length, another band) keeps its own. A series' whole report is
its result with the values it lacks taken from ``shared`` (:func:`merged`). Because the block is fixed
by the first result, each result can be written as soon as its engine block is done: the batch route
encodes results block by block and never holds the whole answer as Python objects.
"""
from __future__ import annotations

#: Object fields a result leaves out when equal to the shared value, in the order ``shared`` lists them.
PATHS = (
    ("band",), ("p_values",), ("transform",), ("missing",), ("cautions",),
    ("acf", "lags"), ("acf", "lower"), ("acf", "upper"), ("acf", "centre"), ("acf", "standard_error"),
    ("pacf", "lags"), ("pacf", "lower"), ("pacf", "upper"), ("pacf", "centre"), ("pacf", "standard_error"),
    ("seasonal", "period_source"), ("seasonal", "note"),
    ("periodogram", "frequencies"), ("periodogram", "lower"), ("periodogram", "upper"), ("periodogram", "binned"),
)
#: Keys of each test entry a result leaves out when equal to the shared entry at the same position.
TEST_KEYS = ("meaning", "method")


def template(report: dict) -> dict:
    """The ``shared`` block read off one full report (a new dict; the report is not changed)."""
    shared: dict = {}
    for path in PATHS:
        if len(path) == 1:
            shared[path[0]] = report[path[0]]
        else:
            shared.setdefault(path[0], {})[path[1]] = report[path[0]][path[1]]
    shared["tests"] = [{"meaning": t["meaning"], "method": t["method"]} for t in report["tests"]]
    return shared


def strip(result: dict, shared: dict) -> dict:
    """Leave out of a full result (in place) every value it holds equal to ``shared``'s; returns the result."""
    for path in PATHS:
        head = path[0]
        if len(path) == 1:
            if result[head] == shared[head]:
                del result[head]
        else:
            holder, key = result[head], path[1]
            if holder[key] == shared[head][key]:
                del holder[key]
    for t, common in zip(result["tests"], shared["tests"]):
        if t["meaning"] == common["meaning"] and t["method"] == common["method"]:
            del t["meaning"], t["method"]
    return result


def hoist(results: list[dict | None]) -> dict:
    """The ``shared`` block of a list of results (from the first analysed one), each result stripped in place;
    empty when no series was analysed."""
    reports = [r for r in results if r is not None and "error" not in r]
    if not reports:
        return {}
    shared = template(reports[0])
    for r in reports:
        strip(r, shared)
    return shared


def merged(result: dict, shared: dict) -> dict:
    """A result with the values it lacks taken from ``shared``: the series' whole report (a new dict)."""
    out = dict(result)
    for key, value in shared.items():
        if key == "tests":
            out["tests"] = [{**(value[i] if i < len(value) else {}), **t} for i, t in enumerate(result["tests"])]
        elif isinstance(value, dict) and isinstance(result.get(key), dict) and key in ("acf", "pacf", "seasonal",
                                                                                        "periodogram"):
            out[key] = {**value, **result[key]}
        elif key not in result:
            out[key] = value
    return out

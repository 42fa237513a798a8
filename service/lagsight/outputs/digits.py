"""Numbers written to a chosen count of significant digits (the ``digits`` option).

Arrays are rounded at once with NumPy before they become Python lists: the value kept is the
double nearest to the rounded decimal, which JSON writers print as that short decimal (a
decimal of at most 15 significant digits reads back as itself). Scalars in small dicts (the
verdict, the exceedances) are rounded by :func:`tree`. ``None`` digits leave every value as
computed (full precision). Integers, booleans, text and non-finite values are left alone.
"""
from __future__ import annotations

import math

import numpy as np

#: Powers of ten that are exact doubles (10**22 is the largest): the division below is then correctly rounded.
_EXACT_POWER = 22
#: 10.0 ** k for k = 0 .. _EXACT_POWER (exact doubles).
_POWERS = 10.0 ** np.arange(_EXACT_POWER + 1, dtype=np.float64)


def array(a: np.ndarray, digits: int | None) -> np.ndarray:
    """``a`` rounded to ``digits`` significant digits (a new float64 array; ``a`` itself when digits is None)."""
    if digits is None or digits >= 17:
        return a
    a = np.asarray(a, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        magnitude = np.floor(np.log10(np.abs(a)))
        shift = digits - 1 - magnitude  # decimal places to keep (negative: round to tens, hundreds ...)
        ok = np.isfinite(shift) & (np.abs(shift) <= _EXACT_POWER)
        s = np.where(ok, shift, 0.0)
        scale = _POWERS[np.abs(s).astype(np.intp)]  # the same doubles as 10.0 ** |s|, looked up
        out = np.round(a * scale) / scale  # where s >= 0, the usual case; the others just below
        down = s < 0
        if down.any():
            out[down] = np.round(a[down] / scale[down]) * scale[down]
    out = np.where(ok, out, a)
    odd = ~ok & np.isfinite(a) & (a != 0)  # beyond 1e22 or below 1e-22: rare, one at a time
    if odd.any():
        out[odd] = [float(f"{v:.{digits}g}") for v in a[odd].tolist()]
    return out


def arrays(items: list, digits: int | None) -> list:
    """Each array of ``items`` rounded (None stays None), in one :func:`array` call over all of them: a report of
    one series rounds dozens of small arrays, where a NumPy call costs about the same whatever its size."""
    if digits is None or digits >= 17:
        return list(items)
    present = [a if type(a) is np.ndarray and a.dtype == np.float64 else np.asarray(a, dtype=np.float64)
               for a in items if a is not None]
    if not present:
        return list(items)
    flat = array(np.concatenate([a.reshape(-1) for a in present]), digits)
    out, at = [], 0
    shapes = iter(present)
    for a in items:
        if a is None:
            out.append(None)
            continue
        p = next(shapes)
        out.append(flat[at:at + p.size].reshape(p.shape))
        at += p.size
    return out


def value(x, digits: int | None):
    """One number rounded to ``digits`` significant digits (other values unchanged)."""
    if digits is None or type(x) is not float or not math.isfinite(x) or digits >= 17:
        return x
    return float(f"{x:.{digits}g}")


def tree(obj, digits: int | None):
    """Every float in nested dicts and lists rounded (a new structure; ``obj`` itself when digits is None)."""
    if digits is None or digits >= 17:
        return obj
    spec = f".{digits}g"

    def walk(x):
        kind = type(x)
        if kind is float:
            return float(format(x, spec)) if math.isfinite(x) else x
        if kind is dict:
            return {k: walk(v) for k, v in x.items()}
        if kind is list:
            return [walk(v) for v in x]
        return x

    return walk(obj)

"""Average ranks within each row, ties sharing their mean rank and missing entries ranked last (the rank
autocorrelations of the verdict's evidence, :mod:`.whiteness`)."""
from __future__ import annotations

import numpy as np


def tied_ranks(x: np.ndarray, mask: np.ndarray | None, largest_tie: list | None = None) -> np.ndarray:
    """Average ranks within each row (1..n_observed), missing entries ranked last; ties share their mean rank.

    ``largest_tie``, when given, receives per row the size of the largest group of equal observed values.
    """
    filled = x if mask is None else np.where(mask, x, np.inf)
    m, n = x.shape
    order = np.argsort(filled, axis=1)
    sorted_x = np.take_along_axis(filled, order, axis=1)
    tied = sorted_x[:, 1:] == sorted_x[:, :-1]
    positions = np.broadcast_to(np.arange(1, n + 1, dtype=np.float64), x.shape)
    if mask is not None:
        tied = tied & np.isfinite(sorted_x[:, 1:])  # missing entries (ranked last as +inf) are no tie
    if not tied.any():  # the common case: the rank is the position in the sorted row
        out = np.empty((m, n))
        np.put_along_axis(out, order, positions, axis=1)
        if largest_tie is not None:
            largest_tie.append(np.ones(m, dtype=np.int64))
        return out
    new = np.ones((m, n), dtype=bool)
    new[:, 1:] = ~tied
    flat = np.cumsum(new, axis=1) - 1 + np.arange(m)[:, None] * n  # tie-group id, unique across rows
    total = np.bincount(flat.ravel(), weights=positions.ravel(), minlength=m * n)
    count = np.bincount(flat.ravel(), minlength=m * n)
    if largest_tie is not None:
        largest_tie.append(count.reshape(m, n).max(axis=1))
    mean_rank = (total / np.maximum(count, 1))[flat]
    out = np.empty((m, n))
    np.put_along_axis(out, order, mean_rank, axis=1)
    return out

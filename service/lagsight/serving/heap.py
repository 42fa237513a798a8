"""Keep freed array memory in the worker for reuse instead of handing it back to the kernel.

A batch runs the engine block by block, and every block allocates and frees arrays of a few
MiB. With glibc's defaults, freed memory at the top of the heap beyond a small threshold is
returned to the kernel at once, so the next block's arrays fault the same pages in again: about
4,000 page faults (roughly 10% of the engine's time) for 10,000 series of 120 points on the
benchmark machine, and none once freed memory is kept. :func:`keep_freed_memory` sets glibc's
``mallopt`` thresholds; elsewhere (another C library) it leaves the allocator alone.
"""
from __future__ import annotations

import ctypes

#: glibc's mallopt parameter numbers (malloc.h).
M_TRIM_THRESHOLD = -1
M_MMAP_THRESHOLD = -3
#: Arrays up to this share of the kept memory come from the heap (larger ones are mapped and unmapped).
HEAP_SHARE = 2
#: glibc's own ceiling for M_MMAP_THRESHOLD on 64-bit systems (HEAP_MAX_SIZE / 2).
MMAP_THRESHOLD_MAX = 32 << 20


def keep_freed_memory(megabytes: int) -> bool:
    """Let the process keep up to ``megabytes`` MiB of freed memory for reuse.

    Arrays up to ``megabytes / 2`` MiB (at most 32) are taken from the heap (glibc's
    M_MMAP_THRESHOLD), and the heap returns free memory to the kernel only beyond ``megabytes``
    (M_TRIM_THRESHOLD). glibc moves both thresholds by itself until either is set, up to 32 and
    64 MiB, but only after a freed array of each size has been mapped once, and with a trim
    threshold only twice the largest array seen: a block's dozens of arrays of a few MiB still
    exceed it. Setting both fixes them where glibc's own adjustment would end up anyway. Returns True when both took effect; False
    for 0 (leave the defaults) or where the C library has no ``mallopt``.
    """
    if megabytes <= 0:
        return False
    try:
        mallopt = ctypes.CDLL(None).mallopt  # the C library this interpreter already uses
    except (OSError, AttributeError, TypeError):  # no such C library call here (or no process-wide handle)
        return False
    mallopt.argtypes, mallopt.restype = (ctypes.c_int, ctypes.c_int), ctypes.c_int
    size = megabytes << 20
    heap_arrays = min(max(size // HEAP_SHARE, 128 << 10), MMAP_THRESHOLD_MAX)
    return bool(mallopt(M_MMAP_THRESHOLD, heap_arrays)) and bool(mallopt(M_TRIM_THRESHOLD, size))

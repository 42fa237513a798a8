"""Keep freed array memory in the worker for reuse instead of handing it back to the kernel.

A batch runs the engine block by block, and every block allocates and frees arrays of a few
MiB. With glibc's defaults, freed memory at the top of the heap beyond a small threshold is
returned to the kernel at once, so the next block's arrays fault the same pages in again: about
4,000 page faults (roughly 10% of the engine's time) for 10,000 series of 120 points on the
benchmark machine, and none once freed memory is kept. :func:`keep_freed_memory` sets glibc's
``mallopt`` thresholds; elsewhere (another C library) it leaves the allocator alone.

Between requests the worker gives memory back: :class:`MemoryReturn` (installed by the gunicorn
settings) returns a worker that a large request left more than 20% above its idle size to within 20%
of it, by handing free heap pages back to the kernel or, when that is not enough, by having gunicorn
replace the worker (ops/memory_return.py measures it).
"""
from __future__ import annotations

import ctypes
import gc
import os
import threading

_PAGE = os.sysconf("SC_PAGE_SIZE") if hasattr(os, "sysconf") else 4096
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


#: A worker is back to its idle size when its resident memory is at most this share above it.
SETTLED_SHARE = 0.20
#: Seconds after a request before the worker looks at its memory (the answer's own bytes are freed by then).
SETTLE_DELAY_S = 0.5


def resident_bytes() -> int:
    """This process's resident memory (the second field of /proc/self/statm, in pages); 0 where there is none."""
    try:
        with open("/proc/self/statm", "rb") as statm:
            return int(statm.read().split()[1]) * _PAGE
    except (OSError, IndexError, ValueError):
        return 0


def release_freed_memory() -> bool:
    """Hand the heap's free pages back to the kernel now (glibc's ``malloc_trim(0)``); False where unavailable."""
    try:
        malloc_trim = ctypes.CDLL(None).malloc_trim
    except (OSError, AttributeError, TypeError):
        return False
    malloc_trim.argtypes, malloc_trim.restype = (ctypes.c_size_t,), ctypes.c_int
    malloc_trim(0)
    return True


class MemoryReturn:
    """After a request that left the worker well above its idle size, give the memory back or stop the worker.

    :meth:`start` notes the worker's resident size when it is ready (idle). :meth:`after_request` does
    nothing while the worker is within ``SETTLED_SHARE`` of that; otherwise it schedules a look
    ``SETTLE_DELAY_S`` later (gunicorn still holds the answer while its post_request hook runs): collect
    garbage, hand the heap's free pages back (:func:`release_freed_memory`) and, when the worker is still
    above the bound (memory held by live objects or a fragmented heap), call ``recycle`` so that gunicorn
    replaces the worker with a fresh fork of the master. ``report`` receives each outcome's figures.
    """

    def __init__(self, recycle, report, share: float = SETTLED_SHARE, delay_s: float = SETTLE_DELAY_S):
        self.recycle, self.report, self.share, self.delay_s = recycle, report, share, delay_s
        self.idle = 0
        self._pending = None

    def start(self) -> None:
        self.idle = resident_bytes()

    def bound(self) -> int:
        return int(self.idle * (1 + self.share))

    def after_request(self) -> None:
        if not self.idle or resident_bytes() <= self.bound() or self._pending is not None:
            return
        self._pending = threading.Timer(self.delay_s, self.settle)
        self._pending.daemon = True
        self._pending.start()

    def settle(self) -> str:
        """Give memory back, or recycle; returns "settled", "released" or "recycled"."""
        self._pending = None
        before = resident_bytes()
        if before <= self.bound():
            outcome, after = "settled", before
        else:
            gc.collect()
            release_freed_memory()
            after = resident_bytes()
            outcome = "released" if after <= self.bound() else "recycled"
        self.report({"outcome": outcome, "idle_mib": _mib(self.idle), "before_mib": _mib(before),
                     "after_mib": _mib(after), "bound_mib": _mib(self.bound())})
        if outcome == "recycled":
            self.recycle()
        return outcome


def _mib(n: int) -> float:
    return round(n / 2**20, 1)

"""What the numbers were measured on: CPU, cores, memory, load, library versions, BLAS."""
from __future__ import annotations

import os
import platform
import sys
from importlib import metadata

PACKAGES = ("numpy", "scipy", "pandas", "statsmodels", "orjson", "flask", "marshmallow", "gunicorn")
BLAS_VARIABLES = ("OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE", "OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS",
                  "MKL_NUM_THREADS")


def _cpu_model() -> str:
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as fh:
            for line in fh:
                if line.startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown"


def _memory_gib() -> float | None:
    try:
        with open("/proc/meminfo", encoding="utf-8") as fh:
            for line in fh:
                if line.startswith("MemTotal:"):
                    return int(line.split()[1]) / 1024**2
    except OSError:
        pass
    return None


def load_average() -> tuple[float, float, float] | None:
    try:
        return os.getloadavg()
    except OSError:
        return None


def blas() -> list[dict]:
    """threadpoolctl's view of the BLAS/OpenMP libraries numpy and scipy loaded (empty if not installed)."""
    try:
        import numpy  # noqa: F401  (load the libraries first)
        import scipy.linalg  # noqa: F401
        from threadpoolctl import threadpool_info
    except ImportError:
        return []
    keep = ("user_api", "internal_api", "version", "architecture", "num_threads", "threading_layer")
    return [{k: lib.get(k) for k in keep} for lib in threadpool_info()]


def describe() -> dict:
    versions = {}
    for name in PACKAGES:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = None
    return {
        "cpu": _cpu_model(),
        "cores": os.cpu_count(),
        "memory_gib": _memory_gib(),
        "platform": platform.platform(),
        "python": sys.version.split()[0],
        "versions": versions,
        "blas": blas(),
        "blas_environment": {k: os.environ.get(k) for k in BLAS_VARIABLES if os.environ.get(k) is not None},
        "load_average_at_start": load_average(),
    }

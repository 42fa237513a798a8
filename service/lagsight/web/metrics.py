"""Prometheus metrics: request counts and latencies by route and status, series and points analysed.

No Flask imports: the pipeline records what it analysed here, the HTTP layer
(:mod:`lagsight.web.observability`) records requests. Under gunicorn the workers
share counts through prometheus_client's multiprocess mode: ``lagsight serve``
(and the gunicorn config) point ``PROMETHEUS_MULTIPROC_DIR`` at an empty
directory before the workers start, and /metrics merges every worker's files.
"""
from __future__ import annotations

import os

from prometheus_client import (
    CONTENT_TYPE_PLAIN_0_0_4,
    CollectorRegistry,
    Counter,
    Histogram,
    generate_latest,
    multiprocess,
)

MULTIPROC_ENV = "PROMETHEUS_MULTIPROC_DIR"

#: Seconds; the top buckets cover the default worker timeout (60 s).
LATENCY_BUCKETS = (0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0, 60.0)

REQUESTS = Counter(
    "lagsight_http_requests", "HTTP requests answered, by route template, method and status.",
    ["route", "method", "status"],
)
LATENCY = Histogram(
    "lagsight_http_request_duration_seconds", "Time from request start to response, by route template, method and status.",
    ["route", "method", "status"], buckets=LATENCY_BUCKETS,
)
STOPPED = Counter(
    "lagsight_requests_stopped", "Requests ended before they finished, by what stopped them: the request deadline "
    "(a 503, or error lines in an NDJSON stream) or the worker being stopped (its timeout, or a quick shutdown).",
    ["by"],
)
SERIES = Counter("lagsight_series_analysed", "Series analysed (reports produced).")
POINTS = Counter("lagsight_points_analysed", "Usable observations analysed, summed over series.")


#: The (count, latency) children of each label set seen, so a request skips prometheus_client's
#: label checks; the library keeps the same children, so nothing is counted twice or lost.
_REQUEST_CHILDREN: dict[tuple[str, str, str], tuple] = {}


def record_request(route: str, method: str, status: int, seconds: float) -> None:
    labels = (route, method, str(status))
    children = _REQUEST_CHILDREN.get(labels)
    if children is None:
        children = _REQUEST_CHILDREN[labels] = (REQUESTS.labels(*labels), LATENCY.labels(*labels))
    children[0].inc()
    children[1].observe(seconds)


def record_stopped(by: str) -> None:
    """One request ended early: ``by`` is "deadline" or "worker"."""
    STOPPED.labels(by).inc()


def record_analysed(series: int, points: int) -> None:
    SERIES.inc(series)
    POINTS.inc(points)


def exposition() -> tuple[bytes, str]:
    """The metrics in the Prometheus text format, merged across workers when several share a directory."""
    if os.environ.get(MULTIPROC_ENV):
        registry = CollectorRegistry()
        multiprocess.MultiProcessCollector(registry)
        return generate_latest(registry), CONTENT_TYPE_PLAIN_0_0_4
    return generate_latest(), CONTENT_TYPE_PLAIN_0_0_4


def worker_exited(pid: int) -> None:
    """Let the multiprocess files of a dead worker be merged and its live gauges dropped (gunicorn child_exit)."""
    if os.environ.get(MULTIPROC_ENV):
        multiprocess.mark_process_dead(pid)


MODEL_FITS = Counter("lagsight_models_fitted", "Models fitted by POST /v1/model-check (each order of a search counts).")


def record_fits(count: int) -> None:
    MODEL_FITS.inc(count)

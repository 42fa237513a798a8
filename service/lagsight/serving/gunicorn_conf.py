"""gunicorn settings from the LAGSIGHT_* environment: ``gunicorn -c python:lagsight.serving.gunicorn_conf lagsight.serving.wsgi:app``.

``lagsight serve`` uses this file; a deployment can use it directly (see
docs/DEPLOYMENT.md). Values come from :mod:`lagsight.config`, so the one table
in docs/CONFIGURATION.md documents them. It also prepares the directory through
which the workers share their Prometheus counts, makes gunicorn's own log
lines JSON like the service's (without the caller's bytes: :mod:`lagsight.serving.server_errors`),
answers gunicorn's own errors as problem+json with the service's headers, sends no ``Server`` header,
freezes the preloaded objects before each fork, and lets the workers keep freed array memory for reuse
(:mod:`lagsight.serving.heap`).
"""
import gc
import glob
import os
import shutil
import signal
import tempfile

# One BLAS/OpenMP thread per worker unless the operator says otherwise: the workers already
# share the cores, and BLAS threads on top of them oversubscribe the machine (a 3,000-row STL
# product measured 8 ms median with two threads per worker on a busy 2-core machine, 3 ms with
# one). Set here, before NumPy is first imported (preload_app imports it in the master).
for _threads in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_threads, "1")

from lagsight import (
    config as _config,  # imports no metrics: prometheus_client must see the directory first
)

MULTIPROC_ENV = "PROMETHEUS_MULTIPROC_DIR"  # read by prometheus_client when it is first imported

_s = _config.load()

# Workers share metrics through files in one directory, which must start empty.
_made_dir = not os.environ.get(MULTIPROC_ENV)
if _made_dir:
    os.environ[MULTIPROC_ENV] = tempfile.mkdtemp(prefix="lagsight-metrics-")
for _stale in glob.glob(os.path.join(os.environ[MULTIPROC_ENV], "*.db")):
    os.remove(_stale)

# After the metrics directory is set: server_errors counts the requests a stopped worker answers.
from lagsight.serving import banner, heap, server_errors, whole_response  # noqa: E402

whole_response.install()  # header and body in one write: a killed worker never leaves a half-sent response
server_errors.install(_s["FRAME_ANCESTORS"])  # gunicorn's own answers as problem+json; no caller bytes in its logs
banner.install()  # no Server header: the service's answers do not name the server software

# Set in the master, so every forked worker inherits it (see lagsight.serving.heap).
heap.keep_freed_memory(_s["HEAP_KEEP_MB"])

bind = [f"{_s['HOST']}:{_s['PORT']}"]
workers = _s["WORKERS"]
timeout = _s["TIMEOUT"]
graceful_timeout = _s["GRACEFUL_TIMEOUT"]
keepalive = _s["KEEPALIVE"]
max_requests = _s["MAX_REQUESTS"]
max_requests_jitter = max_requests // 10
preload_app = True
control_socket_disable = True  # one shared default path would clash between instances on one machine
accesslog = None  # the service writes its own JSON access line per request (request id, route, status, duration)
errorlog = "-"
loglevel = _s["LOG_LEVEL"].lower()
logconfig_dict = {
    "version": 1,
    "disable_existing_loggers": False,
    "formatters": {"json": {"()": "lagsight.web.observability.JsonFormatter"}},
    "filters": {"request_id": {"()": "lagsight.serving.server_errors.RequestIdFilter"}},
    "handlers": {"stderr": {"class": "logging.StreamHandler", "formatter": "json", "stream": "ext://sys.stderr",
                            "filters": ["request_id"]}},
    "root": {"level": "WARNING", "handlers": ["stderr"]},
    "loggers": {
        "gunicorn.error": {"handlers": ["stderr"], "level": _s["LOG_LEVEL"], "propagate": False},
        "gunicorn.access": {"handlers": [], "level": "CRITICAL", "propagate": False},
    },
}


def post_worker_init(worker):
    """On SIGTERM a worker stops listening at once, then finishes the request in hand.

    gunicorn's master closes its listening socket on SIGTERM, but each worker keeps its
    inherited copy open while it drains, so the kernel would go on queueing connections
    that no one will accept (they are reset when the last worker exits). Closing the
    worker's copy too makes new connections fail fast with "refused", which clients and
    proxies retry elsewhere at once; the request being served is unaffected.
    """
    drain = worker.handle_exit

    def stop_listening_then_drain(sig, frame):
        for listener in worker.sockets:
            try:
                listener.close()
            except OSError:
                pass
        drain(sig, frame)

    worker.handle_exit = stop_listening_then_drain
    signal.signal(signal.SIGTERM, stop_listening_then_drain)
    # Memory back after large requests (lagsight.serving.heap.MemoryReturn): idle size noted now; a worker still
    # over it by more than 20% after freeing stops like on SIGTERM (finishing any request in hand) and the
    # master forks a fresh one.
    worker.memory_return = heap.MemoryReturn(
        recycle=lambda: os.kill(os.getpid(), signal.SIGTERM),
        report=lambda figures: worker.log.info(
            "worker memory after a large request: %(outcome)s (idle %(idle_mib)s MiB, before %(before_mib)s, "
            "after %(after_mib)s, bound %(bound_mib)s)", figures))
    worker.memory_return.start()


def post_request(worker, req, environ, resp):
    """Give memory back after a request that left the worker well above its idle size (or recycle it)."""
    worker.memory_return.after_request()


pre_request = server_errors.before_request  # a stopped worker's answer must not reuse the previous request's id


_warmed = False


def pre_fork(server, worker):
    """Freeze the preloaded application's objects before each worker is forked (the master runs this).

    The loaded modules (NumPy, SciPy, statsmodels, Flask and the app) are about 145,000 objects that
    live as long as the process. Frozen, the workers' occasional full garbage collection skips them:
    about 0.4 ms instead of about 60 ms measured on one worker, a pause that otherwise stalls every
    request queued behind it. It also keeps the collector from writing to pages the workers share
    with the master. Requests' own objects are collected as usual.
    """
    global _warmed
    if not _warmed:  # once, before the first fork: the image renderer's modules shared by every worker
        from lagsight.outputs import render

        render.warm()
        _warmed = True
    gc.freeze()


def child_exit(server, worker):
    from lagsight.web.metrics import worker_exited

    worker_exited(worker.pid)


def on_exit(server):
    if _made_dir:
        shutil.rmtree(os.environ[MULTIPROC_ENV], ignore_errors=True)

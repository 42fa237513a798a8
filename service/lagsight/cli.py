"""The ``lagsight`` command: ``lagsight serve --host --port --workers``."""
from __future__ import annotations

import argparse
import os
import sys


def serve(host: str, port: int, workers: int, timeout: int) -> None:
    """Replace this process with gunicorn serving lagsight.wsgi:app."""
    args = [
        sys.executable, "-m", "gunicorn", "lagsight.wsgi:app",
        "--bind", f"{host}:{port}",
        "--workers", str(workers),
        "--timeout", str(timeout),
        "--graceful-timeout", "30",
        "--preload",
        "--no-control-socket",
        "--access-logfile", "-",
    ]
    os.execv(sys.executable, args)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(prog="lagsight", description="Lagsight white-noise diagnostics service.")
    sub = parser.add_subparsers(dest="command", required=True)
    s = sub.add_parser("serve", help="run the HTTP service with gunicorn")
    s.add_argument("--host", default=os.environ.get("LAGSIGHT_HOST", "127.0.0.1"))
    s.add_argument("--port", type=int, default=int(os.environ.get("LAGSIGHT_PORT", "8000")))
    s.add_argument("--workers", type=int, default=int(os.environ.get("LAGSIGHT_WORKERS", str(min(2 * (os.cpu_count() or 1) + 1, 9)))))
    s.add_argument("--timeout", type=int, default=int(os.environ.get("LAGSIGHT_TIMEOUT", "60")))
    ns = parser.parse_args(argv)
    if ns.command == "serve":
        serve(ns.host, ns.port, ns.workers, ns.timeout)


if __name__ == "__main__":
    main()

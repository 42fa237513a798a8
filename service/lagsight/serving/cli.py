"""The ``lagsight`` command: ``lagsight serve --host --port --workers --timeout``.

Flags override the LAGSIGHT_* environment variables of the same meaning; the
other settings (docs/CONFIGURATION.md) come from the environment.
"""
from __future__ import annotations

import argparse
import os
import sys

from lagsight import config

_FLAGS = {"host": "HOST", "port": "PORT", "workers": "WORKERS", "timeout": "TIMEOUT"}


def serve(environ: dict) -> None:
    """Replace this process with gunicorn serving lagsight.serving.wsgi:app with lagsight.serving.gunicorn_conf."""
    args = [sys.executable, "-m", "gunicorn", "-c", "python:lagsight.serving.gunicorn_conf", "lagsight.serving.wsgi:app"]
    os.execve(sys.executable, args, environ)


def main(argv=None) -> None:
    try:
        settings = config.load()
    except ValueError as err:
        sys.exit(f"lagsight: {err}")
    parser = argparse.ArgumentParser(prog="lagsight", description="Lagsight white-noise diagnostics service.")
    sub = parser.add_subparsers(dest="command", required=True)
    s = sub.add_parser("serve", help="run the HTTP service with gunicorn (settings: docs/CONFIGURATION.md)")
    s.add_argument("--host", default=settings["HOST"])
    s.add_argument("--port", type=int, default=settings["PORT"])
    s.add_argument("--workers", type=int, default=settings["WORKERS"])
    s.add_argument("--timeout", type=int, default=settings["TIMEOUT"])
    sub.add_parser("settings", help="print the settings table (variable, default, scope, meaning)")
    ns = parser.parse_args(argv)
    if ns.command == "settings":
        print(config.markdown_table(), end="")
    elif ns.command == "serve":
        environ = dict(os.environ)
        for flag, key in _FLAGS.items():
            environ[config.SETTINGS[key].var] = str(getattr(ns, flag))
        try:
            config.load(environ=environ)  # the flags with the environment (e.g. a --timeout above the graceful timeout)
        except ValueError as err:
            sys.exit(f"lagsight: {err}")
        serve(environ)


if __name__ == "__main__":
    main()

"""No ``Server`` header: gunicorn names itself on every answer, and the service's answers need not say
what software serves them (one less hint for someone probing for a known flaw).

gunicorn has no setting for it; ``install`` (from ``lagsight.serving.gunicorn_conf``) drops the line from
the headers gunicorn adds to each response (``Response.default_headers``). The errors gunicorn answers
itself are written by :mod:`lagsight.serving.server_errors`, which sends none either.
"""
from __future__ import annotations

from gunicorn.http import wsgi


def install() -> None:
    response = wsgi.Response
    if getattr(response, "_lagsight_no_banner", False):
        return
    default_headers = response.default_headers

    def without_banner(self):
        return [line for line in default_headers(self) if not line.lower().startswith("server:")]

    response.default_headers = without_banner
    response._lagsight_no_banner = True

"""GET /: the page a portal user opens to paste a series and see the diagnosis.

The page and its assets are files in ``lagsight/web/static`` (plain HTML, CSS and
JavaScript; nothing is loaded from another origin). The page may be embedded in
an iframe by the origins listed in the ``FRAME_ANCESTORS`` setting
(``LAGSIGHT_FRAME_ANCESTORS``), sent as the CSP ``frame-ancestors`` directive.

The chart colours, shapes and legend words come from :mod:`lagsight.outputs.style`, the same
definition the SVG/PNG images are drawn with: ``GET /static/style.css`` serves them as CSS custom
properties, which page.css and the page's drawing code read.
"""
from __future__ import annotations

from pathlib import Path

from flask import Blueprint, Response, current_app

from lagsight.outputs import style

STATIC = Path(__file__).resolve().parent / "static"

bp = Blueprint("page", __name__, static_folder=str(STATIC), static_url_path="/static")


def content_security_policy(frame_ancestors: str) -> str:
    """The page's CSP: everything from this origin only, framing as configured."""
    return "; ".join([
        "default-src 'none'",
        "script-src 'self'",
        "style-src 'self'",
        "img-src 'self' data:",
        "connect-src 'self'",
        "form-action 'self'",
        "base-uri 'none'",
        f"frame-ancestors {frame_ancestors}",
    ])


@bp.get("/")
def index():
    """Serve the page, with its Content-Security-Policy."""
    html = (STATIC / "index.html").read_bytes()
    return Response(html, mimetype="text/html", headers={
        "Content-Security-Policy": content_security_policy(current_app.config["FRAME_ANCESTORS"]),
        "Cache-Control": "no-cache",
    })


@bp.get("/static/style.css")
def style_sheet():
    """Serve the chart style shared with the images, as CSS custom properties."""
    return Response(style.css(), mimetype="text/css", headers={"Cache-Control": "no-cache"})

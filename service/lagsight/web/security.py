"""Security headers on every response, the CORS allow-list and optional bearer-token auth.

Headers: ``X-Content-Type-Options: nosniff``, ``Referrer-Policy: no-referrer``, a
Content-Security-Policy whose ``frame-ancestors`` is the deployment's
``LAGSIGHT_FRAME_ANCESTORS`` (so the page can be embedded where allowed and
nowhere else), ``Cache-Control: no-store`` unless a view chose otherwise, and the
service version. They are added after the response is built, so error answers
carry them too.

Auth is off unless tokens are configured (``LAGSIGHT_AUTH_TOKENS`` and/or
``LAGSIGHT_AUTH_TOKENS_FILE``). When on, every route except :data:`PUBLIC_PATHS`
needs ``Authorization: Bearer <token>``; tokens are compared in constant time
(SHA-256 digests through :func:`hmac.compare_digest`, every token checked) and a
failure is a 401 problem+json with ``WWW-Authenticate`` (RFC 6750).
"""
from __future__ import annotations

import hashlib
import hmac
import logging
from functools import lru_cache
from pathlib import Path

from flask import Flask, current_app, g, request

from lagsight.problems import Problem
from lagsight.version import __version__
from lagsight.web.observability import route_label

log = logging.getLogger("lagsight")

VERSION_HEADER = "X-Lagsight-Version"
#: Reachable without a token: probes, the contract and the page shell (they carry no data).
PUBLIC_PATHS = frozenset({"/healthz", "/readyz", "/openapi.json", "/"})
PUBLIC_PREFIXES = ("/static/",)
CORS_METHODS = "GET, POST, OPTIONS"
CORS_HEADERS = "Authorization, Content-Type, X-Request-ID"
CORS_EXPOSE = f"X-Request-ID, {VERSION_HEADER}"
CORS_MAX_AGE = "600"

_HTML_POLICY = (
    "default-src 'self'; img-src 'self' data:; object-src 'none'; base-uri 'none'; form-action 'self'"
)
_DATA_POLICY = "default-src 'none'"
#: X-Frame-Options for the frame-ancestors values that older browsers can be told the same way.
_LEGACY_FRAME = {"'none'": "DENY", "'self'": "SAMEORIGIN"}


def read_tokens(inline: tuple[str, ...], path: str) -> tuple[bytes, ...]:
    """Tokens from the setting and the file (one per line, blank lines and # comments skipped).

    A configured file that is missing, unreadable or holds no token stops the
    service from starting rather than leaving it open by accident.
    """
    tokens = list(inline)
    if path:
        try:
            lines = Path(path).read_text(encoding="utf-8").splitlines()
        except OSError as err:
            raise ValueError(f"LAGSIGHT_AUTH_TOKENS_FILE={path!r} cannot be read: {err.strerror}") from None
        from_file = [ln.strip() for ln in lines if ln.strip() and not ln.strip().startswith("#")]
        if not from_file:
            raise ValueError(f"LAGSIGHT_AUTH_TOKENS_FILE={path!r} holds no token")
        tokens.extend(from_file)
    return tuple(hashlib.sha256(t.encode("utf-8")).digest() for t in tokens)


def token_matches(given: str, digests: tuple[bytes, ...]) -> bool:
    """Constant-time check of one presented token against every configured digest."""
    presented = hashlib.sha256(given.encode("utf-8", "surrogatepass")).digest()
    found = False
    for digest in digests:
        found |= hmac.compare_digest(presented, digest)
    return found


def frame_policy(ancestors: str, existing: str | None, html: bool) -> str:
    """The CSP for a response: the view's own policy (or ours) with our frame-ancestors."""
    base = existing or (_HTML_POLICY if html else _DATA_POLICY)
    directives = [d.strip() for d in base.split(";") if d.strip() and not d.strip().lower().startswith("frame-ancestors")]
    directives.append(f"frame-ancestors {ancestors}")
    return "; ".join(directives)


@lru_cache(maxsize=64)
def _cached_frame_policy(ancestors: str, existing: str | None, html: bool) -> str:
    """:func:`frame_policy` once per distinct input (a handful per deployment), not once per response."""
    return frame_policy(ancestors, existing, html)


def data_headers(frame_ancestors: str) -> list[tuple[str, str]]:
    """The security headers every data (non-HTML) answer carries, for answers written outside Flask
    (gunicorn's own errors, see lagsight.serving.server_errors); the same values :func:`_headers` sets."""
    ancestors = frame_ancestors.strip()
    out = [("X-Content-Type-Options", "nosniff"), ("Referrer-Policy", "no-referrer"), ("Cache-Control", "no-store"),
           (VERSION_HEADER, __version__), ("Content-Security-Policy", frame_policy(ancestors, None, False))]
    if ancestors in _LEGACY_FRAME:
        out.append(("X-Frame-Options", _LEGACY_FRAME[ancestors]))
    return out


def _origin_allowed(origin: str, allowed: tuple[str, ...]) -> bool:
    return bool(origin) and ("*" in allowed or origin in allowed)


def _is_public(path: str) -> bool:
    return path in PUBLIC_PATHS or path.startswith(PUBLIC_PREFIXES)


def _authenticate() -> None:
    digests = current_app.extensions["lagsight.tokens"]
    if not digests or request.method == "OPTIONS" or _is_public(request.path):
        return
    scheme, _, token = request.headers.get("Authorization", "").partition(" ")
    token = token.strip()
    if scheme.lower() != "bearer" or not token:
        raise Problem("unauthorized", "This deployment requires a bearer token: send Authorization: Bearer <token>.",
                      headers={"WWW-Authenticate": 'Bearer realm="lagsight"'})
    if not token_matches(token, digests):
        log.info("rejected bearer token", extra={"request_id": g.get("request_id"), "route": route_label()})
        raise Problem("unauthorized", "The bearer token is not valid for this deployment.",
                      headers={"WWW-Authenticate": 'Bearer realm="lagsight", error="invalid_token"'})


def _preflight():
    """Answer a CORS preflight from an allowed origin; others fall through to the usual OPTIONS answer."""
    if request.method != "OPTIONS" or "Access-Control-Request-Method" not in request.headers:
        return None
    if not _origin_allowed(request.headers.get("Origin", ""), current_app.config["CORS_ORIGINS"]):
        return None
    response = current_app.response_class(status=204)
    response.headers["Access-Control-Allow-Methods"] = CORS_METHODS
    response.headers["Access-Control-Allow-Headers"] = CORS_HEADERS
    response.headers["Access-Control-Max-Age"] = CORS_MAX_AGE
    return response


def _headers(response):
    cfg = current_app.config
    h = response.headers
    h.setdefault("X-Content-Type-Options", "nosniff")
    h.setdefault("Referrer-Policy", "no-referrer")
    h.setdefault("Cache-Control", "no-store")
    h[VERSION_HEADER] = __version__
    ancestors = cfg["FRAME_ANCESTORS"].strip()
    h["Content-Security-Policy"] = _cached_frame_policy(ancestors, h.get("Content-Security-Policy"),
                                                        response.mimetype == "text/html")
    legacy = _LEGACY_FRAME.get(ancestors)
    if legacy:
        h["X-Frame-Options"] = legacy
    origin = request.headers.get("Origin", "")
    if _origin_allowed(origin, cfg["CORS_ORIGINS"]):
        h["Access-Control-Allow-Origin"] = "*" if "*" in cfg["CORS_ORIGINS"] else origin
        h["Access-Control-Expose-Headers"] = CORS_EXPOSE
    if cfg["CORS_ORIGINS"] and "*" not in cfg["CORS_ORIGINS"]:
        h.add("Vary", "Origin")
    return response


def init_app(app: Flask) -> None:
    tokens = read_tokens(app.config["AUTH_TOKENS"], app.config["AUTH_TOKENS_FILE"])
    app.extensions["lagsight.tokens"] = tokens
    if not tokens and not app.testing:
        log.warning("authentication is OFF: anyone who can reach this service can use it; "
                    "set LAGSIGHT_AUTH_TOKENS or LAGSIGHT_AUTH_TOKENS_FILE for a shared deployment")
    app.before_request(_preflight)
    app.before_request(_authenticate)
    app.after_request(_headers)

"""Settings: defaults, overridden by LAGSIGHT_* environment variables, overridden by create_app(config)."""
from __future__ import annotations

import os
from pathlib import Path

from . import options


def csp_sources(raw: str) -> str:
    """A CSP source list (for frame-ancestors): space-separated sources, no directive separators."""
    value = " ".join(raw.split())
    if not value or any(ch in value for ch in ";,\""):
        raise ValueError("must be space-separated CSP sources such as 'self' https://portal.example")
    return value


#: name -> (environment variable, default, parser)
SETTINGS = {
    "MAX_BODY_BYTES": ("LAGSIGHT_MAX_BODY_BYTES", options.DEFAULT_LIMITS["max_body_bytes"], int),
    "MAX_POINTS": ("LAGSIGHT_MAX_POINTS", options.DEFAULT_LIMITS["max_points"], int),
    "MAX_LAG": ("LAGSIGHT_MAX_LAG", options.DEFAULT_LIMITS["max_lag"], int),
    # CSP frame-ancestors sources allowed to embed the page (GET /) in an iframe, e.g.
    # "'self' https://portal.example"; 'none' forbids embedding.
    "FRAME_ANCESTORS": ("LAGSIGHT_FRAME_ANCESTORS", "'self'", csp_sources),
    "OPENAPI_PATH": ("LAGSIGHT_OPENAPI_PATH", str(Path(__file__).resolve().parents[2] / "openapi" / "openapi.yaml"), str),
}


def load(overrides: dict | None = None, environ=None) -> dict:
    """Resolve every setting; raise ValueError naming the variable when one does not parse."""
    environ = os.environ if environ is None else environ
    out = {}
    for key, (var, default, parse) in SETTINGS.items():
        raw = environ.get(var)
        try:
            out[key] = parse(raw) if raw not in (None, "") else default
        except ValueError:
            raise ValueError(f"{var}={raw!r} is not a valid {parse.__name__}") from None
    out.update(overrides or {})
    return out

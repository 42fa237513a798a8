"""Settings: defaults, overridden by LAGSIGHT_* environment variables, overridden by create_app(config)."""
from __future__ import annotations

import os
from pathlib import Path

from . import options

#: name -> (environment variable, default, parser)
SETTINGS = {
    "MAX_BODY_BYTES": ("LAGSIGHT_MAX_BODY_BYTES", options.DEFAULT_LIMITS["max_body_bytes"], int),
    "MAX_POINTS": ("LAGSIGHT_MAX_POINTS", options.DEFAULT_LIMITS["max_points"], int),
    "MAX_LAG": ("LAGSIGHT_MAX_LAG", options.DEFAULT_LIMITS["max_lag"], int),
    "MAX_REPLICATES": ("LAGSIGHT_MAX_REPLICATES", options.DEFAULT_LIMITS["max_replicates"], int),
    "MAX_SIMULATED_VALUES": ("LAGSIGHT_MAX_SIMULATED_VALUES", options.DEFAULT_LIMITS["max_simulated_values"], int),
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

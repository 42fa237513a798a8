"""Settings: defaults, overridden by LAGSIGHT_* environment variables, overridden by create_app(config).

Every setting is one row of :data:`SETTINGS`; docs/CONFIGURATION.md shows the same
table (``python -m lagsight.config`` prints it) and a test keeps the two in step.
Server settings (bind, workers, timeouts) are read by ``lagsight serve`` and the
gunicorn config; the others by the application factory.
"""
from __future__ import annotations

import os
from pathlib import Path
from typing import Callable, NamedTuple

from lagsight import options


def positive_int(raw: str) -> int:
    value = int(raw)
    if value < 1:
        raise ValueError("must be at least 1")
    return value


def non_negative_int(raw: str) -> int:
    value = int(raw)
    if value < 0:
        raise ValueError("must be 0 or more")
    return value


def positive_seconds(raw: str) -> float:
    value = float(raw)
    if not value > 0 or value == float("inf"):
        raise ValueError("must be a positive number of seconds")
    return value


def word_list(raw: str) -> tuple[str, ...]:
    """Comma- or space-separated words, empty entries dropped."""
    return tuple(w for w in raw.replace(",", " ").split() if w)


def csp_sources(raw: str) -> str:
    """A CSP source list (for frame-ancestors): space-separated sources, no directive separators."""
    value = " ".join(raw.split())
    if not value or any(ch in value for ch in ";,\""):
        raise ValueError("must be space-separated CSP sources such as 'self' https://portal.example")
    return value


def log_level(raw: str) -> str:
    level = raw.strip().upper()
    if level not in {"DEBUG", "INFO", "WARNING", "ERROR", "CRITICAL"}:
        raise ValueError("must be one of DEBUG, INFO, WARNING, ERROR, CRITICAL")
    return level


def default_workers() -> int:
    """2 x cores + 1, at most 9 (common practice for sync workers, from gunicorn's documentation)."""
    return min(2 * (os.cpu_count() or 1) + 1, 9)


class Setting(NamedTuple):
    var: str
    default: object
    parse: Callable
    doc: str = ""
    scope: str = "app"  # "app" (read by the factory) or "server" (read by lagsight serve / gunicorn)


#: name -> Setting(environment variable, default, parser, description, scope)
SETTINGS: dict[str, Setting] = {
    # server
    "HOST": Setting("LAGSIGHT_HOST", "127.0.0.1", str, "Interface to bind; 0.0.0.0 to listen on every interface.", "server"),
    "PORT": Setting("LAGSIGHT_PORT", 8000, positive_int, "TCP port to bind.", "server"),
    "WORKERS": Setting("LAGSIGHT_WORKERS", default_workers(), positive_int,
                       "gunicorn worker processes (default 2 x cores + 1, at most 9).", "server"),
    "TIMEOUT": Setting("LAGSIGHT_TIMEOUT", 60, positive_int,
                       "Seconds a worker may spend on one request before gunicorn restarts it.", "server"),
    "GRACEFUL_TIMEOUT": Setting("LAGSIGHT_GRACEFUL_TIMEOUT", None, positive_int,
                                "Seconds in-flight requests get to finish after SIGTERM; by default the TIMEOUT. "
                                "A value below the TIMEOUT is refused at start: a request the worker timeout allows "
                                "would be cut off by a shutdown.", "server"),
    "KEEPALIVE": Setting("LAGSIGHT_KEEPALIVE", 5, non_negative_int,
                         "Seconds to hold an idle keep-alive connection (gthread workers; sync workers close).", "server"),
    "MAX_REQUESTS": Setting("LAGSIGHT_MAX_REQUESTS", 1000, non_negative_int,
                            "Recycle a worker after this many requests plus a random 0-10% (jitter, so that workers "
                            "do not restart together); 0 = never. A recycled worker gives back what its largest "
                            "requests left it holding (see docs/DEPLOYMENT.md).", "server"),
    "HEAP_KEEP_MB": Setting("LAGSIGHT_HEAP_KEEP_MB", 64, non_negative_int,
                            "MiB of freed memory each worker keeps for reuse rather than returning it to the kernel at "
                            "once (arrays up to half of it, at most 32 MiB, come from the heap); spares large batches "
                            "repeated page faults. glibc only; 0 keeps the C library's defaults.", "server"),
    # limits
    "MAX_BODY_BYTES": Setting("LAGSIGHT_MAX_BODY_BYTES", options.DEFAULT_LIMITS["max_body_bytes"], positive_int,
                              "Largest request body in bytes, with or without Content-Length (413 beyond)."),
    "MAX_POINTS": Setting("LAGSIGHT_MAX_POINTS", options.DEFAULT_LIMITS["max_points"], positive_int,
                          "Most usable points in one series (422 beyond)."),
    "MAX_LAG": Setting("LAGSIGHT_MAX_LAG", options.DEFAULT_LIMITS["max_lag"], positive_int,
                       "Highest lag a request may ask for (422 beyond)."),
    "MAX_SERIES": Setting("LAGSIGHT_MAX_SERIES", options.DEFAULT_LIMITS["max_series"], positive_int,
                          "Most series in one batch request (413 beyond, before any validation)."),
    "MAX_BATCH_POINTS": Setting("LAGSIGHT_MAX_BATCH_POINTS", options.DEFAULT_LIMITS["max_batch_points"], positive_int,
                                "Most values in one batch request, all series together (413 beyond, before any validation)."),
    "MAX_REPLICATES": Setting("LAGSIGHT_MAX_REPLICATES", options.DEFAULT_LIMITS["max_replicates"], positive_int,
                              "Most Monte Carlo replicates a request may ask for (422 beyond)."),
    "MAX_SIMULATED_VALUES": Setting("LAGSIGHT_MAX_SIMULATED_VALUES", options.DEFAULT_LIMITS["max_simulated_values"],
                                    positive_int, "Most Monte Carlo replicates x series length in one request (422 beyond)."),
    "MAX_COST": Setting("LAGSIGHT_MAX_COST", options.DEFAULT_LIMITS["max_cost"], positive_int,
                        "Most estimated work in one request, in cost units (about a millisecond of one core of the "
                        "benchmark machine; see web/budget.py for what is counted): 413 beyond, before any analysis, "
                        "naming the cost and what to change."),
    "REQUEST_DEADLINE": Setting("LAGSIGHT_REQUEST_DEADLINE", None, positive_seconds,
                                "Seconds after which a request still running is ended (checked before each engine "
                                "pass; a pass that has started runs to its end): 503, or one error line per series "
                                "not done in an NDJSON stream. By default half the TIMEOUT; it must be below the "
                                "TIMEOUT."),
    # browsers and security
    "CORS_ORIGINS": Setting("LAGSIGHT_CORS_ORIGINS", (), word_list,
                            "Origins allowed to call from a browser (comma-separated, exact match; * for any). "
                            "Empty: no CORS headers, so browsers on other origins are refused."),
    "FRAME_ANCESTORS": Setting("LAGSIGHT_FRAME_ANCESTORS", "'self'", csp_sources,
                               "CSP frame-ancestors sources allowed to embed the page in an iframe, e.g. "
                               "\"'self' https://portal.example\"; 'none' forbids embedding."),
    "AUTH_TOKENS": Setting("LAGSIGHT_AUTH_TOKENS", (), word_list,
                           "Bearer tokens accepted (comma-separated). Set this or AUTH_TOKENS_FILE to require "
                           "Authorization: Bearer <token>; with neither, the service is OPEN to anyone who can reach it."),
    "AUTH_TOKENS_FILE": Setting("LAGSIGHT_AUTH_TOKENS_FILE", "", str,
                                "File with one bearer token per line (# comments); read at start. "
                                "Tokens from both sources are accepted."),
    # operations
    "LOG_LEVEL": Setting("LAGSIGHT_LOG_LEVEL", "INFO", log_level, "Level of the JSON log lines on stderr."),
    "OPENAPI_PATH": Setting("LAGSIGHT_OPENAPI_PATH",
                            str(Path(__file__).resolve().parents[2] / "openapi" / "openapi.yaml"), str,
                            "The OpenAPI document served at /openapi.json."),
}


def load(overrides: dict | None = None, environ=None) -> dict:
    """Resolve every setting; raise ValueError naming the variable when one does not parse."""
    environ = os.environ if environ is None else environ
    out = {}
    for key, entry in SETTINGS.items():
        var, default, parse = entry[:3]
        raw = environ.get(var)
        try:
            out[key] = parse(raw) if raw not in (None, "") else default
        except ValueError as err:
            reason = f": {err}" if str(err) and "invalid literal" not in str(err) else ""
            raise ValueError(f"{var}={raw!r} is not a valid {getattr(parse, '__name__', 'value')}{reason}") from None
    out.update(overrides or {})
    return _derived(out)


def _derived(out: dict) -> dict:
    """Fill the defaults that follow other settings and refuse combinations that break a promise."""
    timeout = out["TIMEOUT"]
    if out["GRACEFUL_TIMEOUT"] is None:
        out["GRACEFUL_TIMEOUT"] = timeout
    elif out["GRACEFUL_TIMEOUT"] < timeout:
        raise ValueError(f"LAGSIGHT_GRACEFUL_TIMEOUT={out['GRACEFUL_TIMEOUT']} is less than LAGSIGHT_TIMEOUT={timeout}: "
                         "a request the worker timeout allows would be cut off at shutdown; raise it, or leave it "
                         "unset to follow LAGSIGHT_TIMEOUT")
    if out["REQUEST_DEADLINE"] is None:
        out["REQUEST_DEADLINE"] = timeout / 2
    elif out["REQUEST_DEADLINE"] >= timeout:
        raise ValueError(f"LAGSIGHT_REQUEST_DEADLINE={out['REQUEST_DEADLINE']:g} is not below LAGSIGHT_TIMEOUT={timeout}: "
                         "a late request would be killed with its worker instead of ended with an answer; lower it, "
                         "or leave it unset for half the TIMEOUT")
    return out


def markdown_table() -> str:
    """The settings as the Markdown table kept in docs/CONFIGURATION.md."""
    rows = ["| variable | default | scope | meaning |", "| --- | --- | --- | --- |"]
    for entry in SETTINGS.values():
        var, default, _ = entry[:3]
        doc = entry[3] if len(entry) > 3 else ""
        scope = entry[4] if len(entry) > 4 else "app"
        if var == "LAGSIGHT_WORKERS":
            shown = "2 x cores + 1 (max 9)"
        elif var == "LAGSIGHT_OPENAPI_PATH":
            shown = "openapi/openapi.yaml"
        elif var == "LAGSIGHT_GRACEFUL_TIMEOUT":
            shown = "LAGSIGHT_TIMEOUT"
        elif var == "LAGSIGHT_REQUEST_DEADLINE":
            shown = "LAGSIGHT_TIMEOUT / 2"
        elif isinstance(default, tuple):
            shown = ",".join(default) or "(empty)"
        else:
            shown = str(default) if default != "" else "(empty)"
        rows.append(f"| `{var}` | `{shown}` | {scope} | {doc.replace('|', '/')} |")
    return "\n".join(rows) + "\n"


if __name__ == "__main__":
    print(markdown_table(), end="")

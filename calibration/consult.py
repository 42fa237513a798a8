"""The service in process: batch requests in chunks, and what each answer says.

Series go to ``POST /v1/diagnostics/batch`` with ``detail: "full"`` through the app's test client,
encoded and decoded with orjson (the same bytes a remote caller sends; only the socket is skipped).
The readers are tolerant of fields the service may not have yet (an advice ``code``, structure kinds,
a false-discovery-rate reading): what is absent reads as None and is reported as "n/a".
"""
from __future__ import annotations

import datetime as dt
from functools import cache

import orjson

from lagsight import create_app

URL = "/v1/diagnostics/batch"
CHUNK_POINTS = 250_000  # values per request (well below the service's limits)
CHUNK_SERIES = 2_000
#: Settings of the in-process app: quiet access log, limits above any batch sent here.
APP_CONFIG = {"LOG_LEVEL": "WARNING", "MAX_SERIES": 20_000, "MAX_BATCH_POINTS": 5_000_000}
FDR_HINTS = ("fdr", "adjusted")  # a key naming the batch's false-discovery-rate reading contains one of these
FLAG_HINTS = ("flag", "reject", "discover", "signif")


class Service:
    """One in-process app and client, and the vocabulary its OpenAPI document declares."""

    def __init__(self, config: dict | None = None):
        self.app = create_app({**APP_CONFIG, **(config or {})})
        self.client = self.app.test_client()
        spec = orjson.loads(self.client.get("/openapi.json").data)
        schemas = spec["components"]["schemas"]
        items = schemas["Verdict"]["properties"]["structure"].get("items", {})
        self.structure_kinds: tuple[str, ...] = tuple(items.get("enum", ()))
        self.advice_has_code: bool = "code" in schemas["Advice"].get("properties", {})

    def post(self, body: dict) -> dict:
        r = self.client.post(URL, data=orjson.dumps(body, option=orjson.OPT_SERIALIZE_NUMPY),
                             content_type="application/json")
        if r.status_code != 200:
            raise RuntimeError(f"batch request answered {r.status_code}: {r.data[:500]!r}")
        return orjson.loads(r.data)

    def diagnose(self, series, shared: dict, timestamps: list[str] | None = None) -> list[dict]:
        """Full results of every series (rows of an array or lists with None), in order, in chunks."""
        n = len(series[0])
        per_chunk = max(1, min(CHUNK_SERIES, CHUNK_POINTS // max(n, 1)))
        out: list[dict] = []
        for start in range(0, len(series), per_chunk):
            items = []
            for i, values in enumerate(series[start: start + per_chunk], start):
                item = {"id": i, "values": values}
                if timestamps is not None:
                    item["timestamps"] = timestamps
                items.append(item)
            out.extend(self.post({"series": items, "detail": "full", **shared})["results"])
        return out


@cache
def daily_stamps(n: int) -> list[str]:
    """n consecutive days as ISO dates (the service infers period 7 from them)."""
    start = dt.date(2021, 1, 4)
    return [(start + dt.timedelta(days=i)).isoformat() for i in range(n)]


def structure_kinds(result: dict) -> list[str]:
    """The kinds named in verdict.structure (plain strings, or objects with a kind or name)."""
    kinds = []
    for item in (result.get("verdict") or {}).get("structure") or []:
        if isinstance(item, dict):
            item = item.get("kind") or item.get("name")
        if isinstance(item, str):
            kinds.append(item)
    return kinds


def first_advice_code(result: dict) -> str | None:
    advice = result.get("advice") or []
    first = advice[0] if advice else None
    return first.get("code") if isinstance(first, dict) else None


def has_advice_code(result: dict) -> bool:
    return any(isinstance(a, dict) and "code" in a for a in result.get("advice") or [])


def reading(result: dict) -> dict:
    """What one series' answer says, in the terms the rates count."""
    if "error" in result:
        return {"error": True}
    return {"error": False, "white_noise": (result.get("verdict") or {}).get("white_noise"),
            "kinds": structure_kinds(result), "first_code": first_advice_code(result),
            "has_code": has_advice_code(result)}


def find_fdr(obj, path: str = "") -> tuple[str, object] | None:
    """The first key (depth first, shallow keys first) whose name contains "fdr" or "adjusted", with
    its path and value; lists are searched only when they hold objects. None when there is none."""
    if isinstance(obj, dict):
        for key, value in obj.items():
            if any(h in key.lower() for h in FDR_HINTS):
                return f"{path}/{key}", value
        for key, value in obj.items():
            found = find_fdr(value, f"{path}/{key}")
            if found:
                return found
    elif isinstance(obj, list) and obj and isinstance(obj[0], dict):
        for i, value in enumerate(obj):
            found = find_fdr(value, f"{path}/{i}")
            if found:
                return found
    return None


def flagged_after_adjustment(value, alpha: float) -> bool | None:
    """Whether an adjusted reading flags its series: a boolean as it is; a number is an adjusted
    p-value (q-value) compared with alpha; an object is read through its first boolean field named
    like a decision (flag, reject, discovery, significant), else its first number. None: unreadable."""
    if isinstance(value, bool):
        return value
    if isinstance(value, (int, float)):
        return value <= alpha
    if isinstance(value, dict):
        for key, v in value.items():
            if isinstance(v, bool) and any(h in key.lower() for h in FLAG_HINTS):
                return v
        for v in value.values():
            if isinstance(v, (int, float)) and not isinstance(v, bool):
                return v <= alpha
    return None


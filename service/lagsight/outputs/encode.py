"""Bytes out: the JSON encoding (orjson) of reports and problem details."""
from __future__ import annotations

import orjson

_OPTS = orjson.OPT_SERIALIZE_NUMPY


def dumps(obj) -> bytes:
    return orjson.dumps(obj, option=_OPTS)

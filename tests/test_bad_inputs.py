"""The curated bad-input corpus (tests/data/bad_inputs.json): each case gets its documented 4xx problem+json.

The same corpus is sent in-process and, once, over loopback to a real gunicorn,
which must still be answering afterwards. Oversized bodies are also sent to the
real server with a Content-Length and with chunked transfer encoding (no length),
where the limit can only be enforced while reading.
"""
from __future__ import annotations

import json
import socket
from pathlib import Path

import orjson
import pytest
import requests

from lagsight import create_app

from .live_server import live_gunicorn
from .spec_tools import assert_valid, spec

CORPUS = json.loads((Path(__file__).parent / "data" / "bad_inputs.json").read_text())["cases"]
LIMITS = {"MAX_POINTS": 1000, "MAX_BODY_BYTES": 100_000, "MAX_LAG": 200}
ENV = {"LAGSIGHT_MAX_POINTS": "1000", "LAGSIGHT_MAX_BODY_BYTES": "100000", "LAGSIGHT_MAX_LAG": "200"}


def body_of(case) -> bytes:
    if "json" in case:
        return json.dumps(case["json"]).encode()
    if "body_hex" in case:
        return bytes.fromhex(case["body_hex"])
    if "repeat" in case:
        r = case["repeat"]
        text = r["head"] + r["unit"] * r["count"] + r.get("inner", "") + r.get("close", "") * r["count"] + r["tail"]
        return text.encode()
    return case["body"].encode("utf-8", "surrogatepass")


def expected_statuses(case, path_item: dict) -> set[int]:
    """A hostile CSV is 415 while the operation does not take text/csv, then a 400 or 422 problem."""
    if not case.get("csv"):
        return {case["status"]}
    content = path_item.get(case.get("method", "POST").lower(), {}).get("requestBody", {}).get("content", {})
    return {400, 422} if "text/csv" in content else {415}


def headers_of(case) -> dict:
    ct = case.get("content_type", "application/json")
    return {"Content-Type": ct} if ct else {}


def check_answer(case, status: int, content_type: str, body: bytes, allow_header: str | None) -> None:
    path_item = spec()["paths"].get(case.get("path", "/v1/diagnostics").split("?")[0], {})
    assert status in expected_statuses(case, path_item), (case["id"], status, body[:300])
    assert content_type.split(";")[0] == "application/problem+json", case["id"]
    problem = orjson.loads(body)
    assert_valid(problem, "Problem")
    assert problem["status"] == status
    if case.get("type"):
        assert problem["type"] == "urn:lagsight:problem:" + case["type"], (case["id"], problem)
    if "pointer" in case:
        pointers = [e["pointer"] for e in problem.get("errors", [])]  # at the field or one of its elements
        assert any(p == case["pointer"] or p.startswith(case["pointer"] + "/") for p in pointers), (case["id"], problem)
    if status == 405:
        assert allow_header, case["id"]


def test_corpus_is_large_and_covers_every_category():
    assert len(CORPUS) >= 60
    assert len({c["id"] for c in CORPUS}) == len(CORPUS)
    categories = {c["category"] for c in CORPUS}
    for needed in ("malformed JSON", "wrong type", "NaN/Infinity", "huge numbers", "deep nesting", "huge arrays",
                   "empty body", "wrong media type", "bad timestamps", "hostile CSV"):
        assert needed in categories, needed


@pytest.fixture(scope="module")
def corpus_client():
    return create_app({"TESTING": True, **LIMITS}).test_client()


@pytest.mark.parametrize("case", CORPUS, ids=[c["id"] for c in CORPUS])
def test_bad_input_gets_its_documented_problem(corpus_client, case):
    r = corpus_client.open(case.get("path", "/v1/diagnostics"), method=case.get("method", "POST"),
                           data=body_of(case), headers=headers_of(case))
    check_answer(case, r.status_code, r.content_type, r.data, r.headers.get("Allow"))
    assert corpus_client.get("/healthz").status_code == 200


def _chunks(payload: bytes, size: int = 8192):
    for i in range(0, len(payload), size):
        yield payload[i:i + size]


@pytest.mark.slow
def test_corpus_and_oversized_bodies_against_a_live_gunicorn(tmp_path):
    with live_gunicorn(tmp_path, env=ENV, workers=2) as base:
        session = requests.Session()
        for case in CORPUS:
            r = session.request(case.get("method", "POST"), base + case.get("path", "/v1/diagnostics"),
                                data=body_of(case), headers=headers_of(case), timeout=30)
            check_answer(case, r.status_code, r.headers.get("Content-Type", ""), r.content, r.headers.get("Allow"))
        big = b'{"values": [' + b"0.123456789, " * 40_000 + b"1]}"  # about 520 kB, over the 100,000-byte limit
        with_length = session.post(base + "/v1/diagnostics", data=big, headers={"Content-Type": "application/json"},
                                   timeout=30)
        assert "Content-Length" in with_length.request.headers
        chunked = session.post(base + "/v1/diagnostics", data=_chunks(big), headers={"Content-Type": "application/json"},
                               timeout=30)
        assert chunked.request.headers.get("Transfer-Encoding") == "chunked"
        assert "Content-Length" not in chunked.request.headers
        for r in (with_length, chunked):
            assert r.status_code == 413 and r.headers["Content-Type"] == "application/problem+json"
            assert r.json()["type"] == "urn:lagsight:problem:payload-too-large"
            assert "100000 bytes" in r.json()["detail"]
        huge_length = _raw_request(base, b"POST /v1/diagnostics HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
                                         b"Content-Length: 99999999999\r\n\r\n{")
        assert huge_length.startswith(b"HTTP/1.1 413"), huge_length[:200]
        ok = session.post(base + "/v1/diagnostics", json={"values": [1, 3, 2, 5, 4, 6]}, timeout=30)
        assert ok.status_code == 200 and session.get(base + "/readyz", timeout=10).status_code == 200


def _raw_request(base: str, raw: bytes) -> bytes:
    host, port = base.removeprefix("http://").split(":")
    with socket.create_connection((host, int(port)), timeout=30) as s:
        s.sendall(raw)
        s.shutdown(socket.SHUT_WR)
        out = b""
        while chunk := s.recv(65536):
            out += chunk
    return out

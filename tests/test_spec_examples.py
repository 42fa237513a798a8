"""Every example in the contract is sent to the service and answered as the contract documents it.

Request body examples (per media type), parameter examples (a GET is built from its operation's), and the
query strings shown in docs/DATA_IN_OUT.md: each must get a success status documented for its operation,
in a documented media type, with a body that validates against the documented schema.
"""
from __future__ import annotations

import re
from pathlib import Path
from urllib.parse import urlencode

import jsonschema
import orjson
import pytest

from lagsight import create_app

from .spec_tools import spec

ROOT = Path(__file__).resolve().parents[1]
METHODS = ("get", "post", "put", "patch", "delete")


def _resolve(node: dict) -> dict:
    """Follow a local $ref ("#/components/...") to its object."""
    while "$ref" in node:
        target = spec()
        for part in node["$ref"].removeprefix("#/").split("/"):
            target = target[part]
        node = target
    return node


def _parameters(op: dict) -> list[dict]:
    return [_resolve(p) for p in op.get("parameters", [])]


def _examples(media: dict) -> list:
    found = [media["example"]] if "example" in media else []
    return found + [_resolve(e)["value"] for e in media.get("examples", {}).values()]


def _cases() -> list[tuple[str, str, str, dict, object]]:
    """(path, method, content type or "", query, body) for every example in the contract."""
    cases = []
    for path, item in spec()["paths"].items():
        for method, op in item.items():
            if method not in METHODS:
                continue
            query = {p["name"]: p["example"] for p in _parameters(op) if "example" in p}
            missing = [p["name"] for p in _parameters(op) if p.get("required") and p["name"] not in query]
            assert not missing, f"{method.upper()} {path}: required parameters without an example: {missing}"
            content = _resolve(op.get("requestBody", {})).get("content", {})
            for media_type, media in content.items():
                for example in _examples(media):
                    cases.append((path, method, media_type, query, example))
            if query and not content:
                cases.append((path, method, "", query, None))
    return cases


CASES = _cases()


def test_the_contract_has_examples_for_every_operation_that_takes_input():
    """A request body or a required parameter means an example to send (and the cases below send them)."""
    with_input = {(path, method) for path, item in spec()["paths"].items() for method, op in item.items()
                  if method in METHODS and (op.get("requestBody") or any(p.get("required") for p in _parameters(op)))}
    assert with_input and with_input <= {(path, method) for path, method, *_ in CASES}
    assert {(path, method, media) for path, method, media, *_ in CASES} >= {
        ("/v1/diagnostics", "post", "application/json"), ("/v1/diagnostics", "post", "text/csv"),
        ("/v1/diagnostics/batch", "post", "application/json"), ("/v1/diagnostics", "get", "")}


def _check_documented(op: dict, response) -> None:
    status = str(response.status_code)
    assert status in op["responses"] and status.startswith("2"), (status, response.get_data()[:400])
    documented = _resolve(op["responses"][status]).get("content", {})
    media = response.mimetype
    assert media in documented, (media, sorted(documented))
    if media == "application/x-ndjson":
        schema = {**documented[media]["schema"], "components": spec()["components"]}
        lines = response.get_data().splitlines()
        assert lines
        for line in lines:
            jsonschema.validate(orjson.loads(line), schema, cls=jsonschema.Draft202012Validator)
    elif media.endswith("json"):
        schema = {**documented[media]["schema"], "components": spec()["components"]}
        errors = list(jsonschema.Draft202012Validator(schema).iter_errors(response.get_json()))
        assert not errors, "; ".join(f"{list(e.path)}: {e.message}" for e in errors[:5])


@pytest.mark.parametrize("path,method,media_type,query,body", CASES,
                         ids=[f"{m.upper()} {p} {t or 'query'}" for p, m, t, _, _ in CASES])
def test_every_example_is_answered_as_documented(client, path, method, media_type, query, body):
    op = spec()["paths"][path][method]
    url = path + ("?" + urlencode(query) if query else "")
    if media_type.endswith("json"):
        data = orjson.dumps(body)
    elif media_type:
        data = body.encode("utf-8")
    else:
        data = None
    response = client.open(url, method=method.upper(), data=data,
                           headers={"Content-Type": media_type} if media_type else {})
    _check_documented(op, response)
    if path == "/v1/diagnostics/batch":  # and streamed, the other documented answer
        streamed = client.open(url, method="POST", data=data, headers={"Content-Type": media_type,
                                                                        "Accept": "application/x-ndjson"})
        _check_documented(op, streamed)


def test_the_query_strings_in_the_docs_are_answered():
    """docs/DATA_IN_OUT.md shows GET query strings; each is answered with a report."""
    text = (ROOT / "docs" / "DATA_IN_OUT.md").read_text()
    shown = re.findall(r"`(values=[^`]+)`", text)
    assert len(shown) >= 2
    client = create_app({"TESTING": True}).test_client()
    for query in shown:
        response = client.get("/v1/diagnostics?" + query)
        _check_documented(spec()["paths"]["/v1/diagnostics"]["get"], response)

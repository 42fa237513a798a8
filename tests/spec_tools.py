"""Helpers to read openapi/openapi.yaml and validate JSON against its schemas."""
from __future__ import annotations

from functools import lru_cache
from pathlib import Path

import jsonschema
import yaml

SPEC_PATH = Path(__file__).resolve().parents[1] / "openapi" / "openapi.yaml"


@lru_cache(maxsize=1)
def spec() -> dict:
    return yaml.safe_load(SPEC_PATH.read_text())


def validator(schema_name: str) -> jsonschema.Draft202012Validator:
    """A JSON Schema 2020-12 validator for components/schemas/<schema_name> (OpenAPI 3.1 schemas are 2020-12)."""
    doc = spec()
    schema = {"$ref": f"#/components/schemas/{schema_name}", "components": doc["components"]}
    return jsonschema.Draft202012Validator(schema)


def assert_valid(instance, schema_name: str) -> None:
    errors = sorted(validator(schema_name).iter_errors(instance), key=lambda e: list(e.path))
    assert not errors, "; ".join(f"{list(e.path)}: {e.message}" for e in errors[:5])


def assert_problem_at(response, pointer: str, phrase: str) -> None:
    """A 422 problem+json, valid against the spec's Problem, with an error at ``pointer`` whose detail contains
    ``phrase`` (case aside)."""
    assert response.status_code == 422 and response.mimetype == "application/problem+json", response.get_json()
    problem = response.get_json()
    assert_valid(problem, "Problem")
    details = {e["pointer"]: e["detail"] for e in problem["errors"]}
    assert pointer in details and phrase.lower() in details[pointer].lower(), details

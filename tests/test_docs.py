"""The copies of facts in the docs agree with what the service does."""
from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _subset_matches(expected, actual, path="$"):
    """Every key in expected is in actual with the same value (floats to the shown decimals)."""
    if isinstance(expected, dict):
        for k, v in expected.items():
            assert k in actual, f"{path}.{k} missing"
            _subset_matches(v, actual[k], f"{path}.{k}")
    elif isinstance(expected, list):
        assert len(actual) >= len(expected), path
        for i, v in enumerate(expected):
            _subset_matches(v, actual[i], f"{path}[{i}]")
    elif isinstance(expected, float):
        decimals = len(repr(expected).split(".")[1])
        assert actual == pytest.approx(expected, abs=0.51 * 10**-decimals), path
    else:
        assert actual == expected, path


def test_readme_example_is_what_the_service_returns(client):
    text = (ROOT / "README.md").read_text()
    m = re.search(r"<!-- readme-example: (\S+) -->\s*```json\n(.*?)```", text, re.S)
    assert m, "README example block not found"
    payload = json.loads((ROOT / m.group(1)).read_text())
    actual = client.post("/v1/diagnostics", json=payload).get_json()
    _subset_matches(json.loads(m.group(2)), actual)


def test_readme_shows_the_two_commands_and_ci_runs_make_test():
    assert "make serve" in (ROOT / "README.md").read_text()
    assert "make test" in (ROOT / "README.md").read_text()
    assert "make test" in (ROOT / ".ci" / "run").read_text()

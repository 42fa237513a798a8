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


def _tables(text: str) -> list[list[str]]:
    """Runs of consecutive lines that start with "|" (outside code blocks)."""
    runs, run, fenced = [], [], False
    for line in text.splitlines() + [""]:
        fenced ^= line.startswith("```")
        if line.startswith("|") and not fenced:
            run.append(line)
        elif run:
            runs.append(run)
            run = []
    return runs


@pytest.mark.parametrize("doc", ["README.md", "DEVELOPERS.md", "docs/DATA_IN_OUT.md", "docs/CONFIGURATION.md",
                                 "docs/DEPLOYMENT.md", "client_examples/README.md", "demo_payloads/README.md"])
def test_every_table_row_is_inside_a_table(doc):
    """A row cut off from its table (a blank line or a paragraph between) shows as a stray line of pipes."""
    for run in _tables((ROOT / doc).read_text()):
        separator = set(run[1].replace("|", "").replace(":", "").replace(" ", ""))
        assert len(run) >= 3 and separator == {"-"}, run[:2]


def test_the_readme_route_table_lists_every_route_the_service_answers():
    from lagsight import create_app

    section = (ROOT / "README.md").read_text().split("## The API in brief", 1)[1].split("\n## ", 1)[0]
    table = "\n".join(_tables(section)[0])
    for rule in create_app({"TESTING": True}).url_map.iter_rules():
        if rule.endpoint.endswith("static"):
            continue
        for method in sorted(rule.methods - {"HEAD", "OPTIONS"}):
            assert f"`{method} {rule.rule}`" in table or f"`{method} {rule.rule}?" in table, (method, rule.rule)

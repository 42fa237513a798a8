"""The copies of facts in the docs agree with what the service does."""
from __future__ import annotations

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


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

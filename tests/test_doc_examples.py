"""Every example in README.md, docs/*.md, client_examples/README.md and demo_payloads/README.md is run against a
live gunicorn, and each shown output must be what the service answered (volatile values aside).

The examples are the marked fenced blocks (tests/doc_examples.py says how they are marked, run and rendered);
`make docs-examples` rewrites the output blocks from a fresh run. A block that looks like a request must be marked,
and the few that cannot run here are listed below with why.
"""
from __future__ import annotations

import pytest

from . import doc_examples as ex

#: The examples that cannot run on the test machine. Adding one is a decision: it goes here with the doc's reason.
NOT_RUN = {
    "two-commands", "test-core",  # they install and start the suite or a server (tests/test_tooling.py: make -n)
    "frame-ancestors", "portal-iframe",  # a server in the foreground; a portal's page (tests/test_page_browser.py)
    "clients-powershell",  # no PowerShell here (tests/test_client_examples.py parses the script)
    "deploy-install", "deploy-systemd", "deploy-nginx-upstreams",  # root, systemd, nginx configuration (ops/)
    "dask-install", "dask-cluster",  # a package install; a cluster and an object store (tests/test_distributed.py)
    "demo-generate",  # rewrites committed files (tests/test_demo_payloads.py)
}
EXAMPLES = ex.examples()
RUNNING = [b.name for b in EXAMPLES if ex.not_run(b) is None]


def test_every_block_that_looks_like_a_request_is_marked():
    unmarked = [b.where for b in ex.all_blocks() if b.kind is None and b.looks_like_a_request()]
    assert unmarked == [], "mark each as an example (see tests/doc_examples.py), or say why it cannot run"


@pytest.mark.parametrize("text", [
    "Call it:\n\n```sh\ncurl -s localhost:8000/healthz\n```\n",
    "```\npython client_examples/lagsight_client.py single x.json\n```\n",
    "```python\nimport lagsight\n```\n",
    "<!-- a comment that is not a marker -->\n```bash\necho hello\n```\n",
])
def test_an_unmarked_request_is_found(text):
    """The check above can fail: a new curl command, client call or snippet without a marker is caught."""
    assert [b for b in ex.blocks("new.md", text) if b.kind is None and b.looks_like_a_request()]


def test_formulas_and_diagrams_need_no_marker():
    text = "```\nS_k = sum_t d_t d_{t+k}\n```\n\n```\ntimestamps -> missing values -> transforms\n```\n"
    assert not any(b.looks_like_a_request() for b in ex.blocks("new.md", text))


def test_names_are_unique_and_each_output_follows_its_example():
    names = [b.name for b in EXAMPLES]
    assert len(names) == len(set(names)) and all(names)
    by_name = {b.name: b for b in EXAMPLES}
    outputs = ex.output_blocks()
    for name, out in outputs.items():
        example = by_name.get(name)
        assert example and example.doc == out.doc and example.close_line < out.open_line, out.where
        assert ex.not_run(example) is None, f"{out.where}: an output for an example that is not run"
    assert set(RUNNING) == set(outputs), "every example that runs shows its output: run `make docs-examples`"


def test_the_examples_not_run_are_few_and_say_why():
    assert {b.name for b in EXAMPLES if ex.not_run(b) is not None} == NOT_RUN
    assert len(NOT_RUN) <= 12 and len(RUNNING) >= 8
    for block in EXAMPLES:
        reason = ex.not_run(block)
        if reason is not None:
            assert len(reason.split()) >= 8, block.where
            assert any(where in reason for where in ("tests/", "ops/", "make ")), (block.where, reason)


def test_every_document_a_new_user_reads_is_covered():
    assert {"README.md", "client_examples/README.md", "docs/DATA_IN_OUT.md", "docs/DEPLOYMENT.md",
            "docs/CONFIGURATION.md", "docs/DASK.md"} <= set(ex.DOCS)
    assert {b.doc for b in EXAMPLES if ex.not_run(b) is None} >= {"README.md", "client_examples/README.md",
                                                                  "docs/DATA_IN_OUT.md", "demo_payloads/README.md"}


def test_excerpts_keep_what_the_marker_names_and_mark_what_is_left_out():
    answer = '{"n": 56, "verdict": {"white_noise": true, "p_value": 0.64658, "evidence": [1, 2]}, ' \
             '"tests": [{"name": "ljung_box", "lag": 7}, {"name": "box_pierce", "lag": 7}], "charts": {}}'
    shown = ex.render([("curl ...", answer)], {"show": "n, verdict.p_value, tests[:1].name", "round": "3"})
    assert shown.splitlines() == ['{', '  "n": 56,', '  "verdict": {"p_value": 0.647, ...},',
                                  '  "tests": [', '    {"name": "ljung_box", ...}', '    ...', '  ]', '  ...', '}']
    with pytest.raises(KeyError):
        ex.render([("curl ...", answer)], {"show": "verdict.summary"})
    lines = "\n".join(f"store-{i:03d}: white noise" for i in range(1, 11))
    assert ex.render([("node ...", lines)], {"head": "2", "tail": "1"}).splitlines() == [
        "store-001: white noise", "store-002: white noise", "...", "store-010: white noise"]
    assert ex.render([("a", "1\n"), ("b", "2\n")], {}).splitlines() == ["$ a", "1", "$ b", "2"]


def test_a_changed_answer_is_a_difference_and_a_volatile_value_is_not():
    out = ex.output_blocks()["bakery"]
    assert ex.differences({"bakery": out.text.replace('"n": 56', '"n": 57')})
    text = '{"version": "1.2.0", "request_id": "0123456789abcdef0123456789abcdef"}'
    assert ex.normalised(text) == ex.normalised('{"version": "1.3.0", "request_id": "' + "f" * 32 + '"}')


def test_rewriting_changes_only_the_output_blocks_and_keeps_their_indent():
    doc = "docs/DATA_IN_OUT.md"
    text = (ex.ROOT / doc).read_text()
    assert ex.rewritten(doc, text, {}) == text
    new = ex.rewritten(doc, text, {"csv-table": "lag,acf\n1,0.5", "csv-body": "{}"})
    assert "\n  <!-- output: csv-table; head: 3 -->\n  ```text\n  lag,acf\n  1,0.5\n  ```\n" in new
    outputs = {b.name: b.text for b in ex.blocks(doc, new) if b.kind == "output"}
    assert outputs == {"csv-table": "lag,acf\n1,0.5", "csv-body": "{}"}
    assert [b.text for b in ex.blocks(doc, new) if b.kind != "output"] == [
        b.text for b in ex.blocks(doc, text) if b.kind != "output"]


def test_a_new_example_gets_its_output_block():
    text = "Try:\n\n<!-- example: health -->\n```sh\ncurl -s localhost:8000/healthz\n```\n\nMore.\n"
    new = ex.rewritten("new.md", text, {"health": '{"status": "ok"}'})
    assert new == ("Try:\n\n<!-- example: health -->\n```sh\ncurl -s localhost:8000/healthz\n```\n\n"
                   '<!-- output: health -->\n```json\n{"status": "ok"}\n```\n\nMore.\n')
    assert ex.rewritten("new.md", new, {"health": '{"status": "ok"}'}) == new


@pytest.fixture(scope="module")
def answered(live_server) -> dict[str, str]:
    """Every example that runs, run once against the live server: name -> its output block's text."""
    return ex.run_all(live_server)


@pytest.mark.slow
@pytest.mark.clients  # the examples call curl, jq, node and java
@pytest.mark.parametrize("name", RUNNING)
def test_the_shown_output_is_what_the_service_answers(answered, name):
    diff = ex.differences({name: answered[name]})
    assert not diff, "\n".join(diff) + "\n\nrun `make docs-examples` to rewrite the shown outputs"

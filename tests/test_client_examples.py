"""The example clients in client_examples/ against a real gunicorn on loopback.

The curl, Python, Node and Java clients are run for real: their printed verdicts and lags must be what
the service's own JSON says, problem+json errors must be printed with their pointers (exit code 2), and
a server that never answers must end in the client's timeout (exit code 3). The PowerShell script and
the spreadsheet macro cannot run here; they are parsed with grammars from the package registries
(tree-sitter-powershell; the VBA grammar of antlr4-vba) and must parse without a syntax error.
"""
from __future__ import annotations

import json
import os
import shutil
import socket
import subprocess
import sys
from pathlib import Path

import pytest
import requests

from .live_server import gunicorn

pytestmark = [pytest.mark.slow, pytest.mark.clients]

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = ROOT / "client_examples"
DEMO = ROOT / "demo_payloads"
RUN_TIMEOUT = 120  # seconds a client run may take before the test gives up on it


def count_word(count: int, word: str) -> str:
    """A count's noun in the number the clients print: one error, two errors."""
    return word if count == 1 else word + "s"



@pytest.fixture(scope="module")

def java_classes(tmp_path_factory) -> Path:
    """The Java client compiled with javac (warnings as errors)."""
    javac = shutil.which("javac")
    assert javac, "javac is missing: `make test` installs a JDK (default-jdk-headless) when it is absent"
    out = tmp_path_factory.mktemp("java")
    done = subprocess.run([javac, "-Xlint:all", "-Werror", "-d", str(out), str(EXAMPLES / "java" / "LagsightClient.java")],
                          capture_output=True, text=True, timeout=RUN_TIMEOUT)
    assert done.returncode == 0, done.stderr
    return out


@pytest.fixture(scope="module")
def guarded_server(tmp_path_factory):
    """A deployment that requires a bearer token."""
    log = tmp_path_factory.mktemp("guarded") / "gunicorn.log"
    with gunicorn(log, workers=1, env={"LAGSIGHT_AUTH_TOKENS": "team-ops-7f3a"}) as base:
        yield base


@pytest.fixture(params=["curl", "python", "node", "java"])
def client(request) -> list[str]:
    """The command line that starts one client."""
    name = request.param
    if name == "curl":
        return ["bash", str(EXAMPLES / "lagsight.sh")]
    if name == "python":
        return [sys.executable, str(EXAMPLES / "lagsight_client.py")]
    if name == "node":
        return ["node", str(EXAMPLES / "lagsight-client.mjs")]
    return ["java", "-cp", str(request.getfixturevalue("java_classes")), "LagsightClient"]


def run(command: list[str], mode: str, payload: Path, base: str, timeout_s: int = 30, token: str | None = None):
    env = {**os.environ, "LAGSIGHT_URL": base, "LAGSIGHT_TIMEOUT": str(timeout_s)}
    env.pop("LAGSIGHT_TOKEN", None)
    if token:
        env["LAGSIGHT_TOKEN"] = token
    return subprocess.run([*command, mode, str(payload)], capture_output=True, text=True, env=env,
                          timeout=RUN_TIMEOUT, cwd=ROOT)


def word(white_noise) -> str:
    return {True: "white noise", False: "not white noise"}.get(white_noise, "no judgement")


def lags(values: list[int]) -> str:
    return ", ".join(map(str, values)) or "none"


def expected_single(report: dict) -> list[str]:
    return [report["name"] or "(unnamed)", f"verdict: {word(report['verdict']['white_noise'])}",
            f"summary: {report['verdict']['summary']}", f"outside the band (ACF): {lags(report['acf']['outside'])}",
            f"outside the band (PACF): {lags(report['pacf']['outside'])}"]


def expected_batch(answer: dict) -> list[str]:
    lines = [f"{r['id']}: error {r['error']['status']}: {r['error']['detail']}" if r.get("error")
             else f"{r['id']}: {word(r['verdict']['white_noise'])}; ACF outside: {lags(r['acf']['outside'])}"
             for r in answer["results"]]
    s = answer["summary"]
    return lines + [f"summary: {s['white_noise']} white noise, {s['not_white_noise']} not white noise, "
                    f"{s['undetermined']} undetermined, {s['errors']} {count_word(s['errors'], 'error')}"]


@pytest.mark.parametrize("payload", ["bakery_daily_residuals", "call_centre_hourly_wait_residuals"])
def test_single_series_verdict_and_lags_match_the_service(client, live_server, payload):
    path = DEMO / f"{payload}.json"
    answer = requests.post(live_server + "/v1/diagnostics", data=path.read_bytes(),
                           headers={"Content-Type": "application/json"}, timeout=60).json()
    done = run(client, "single", path, live_server)
    assert done.returncode == 0, done.stderr
    assert done.stdout.splitlines() == expected_single(answer)


def test_batch_prints_one_line_per_series_and_the_summary(client, live_server):
    path = DEMO / "retail_weekly_batch_500.json"
    answer = requests.post(live_server + "/v1/diagnostics/batch", data=path.read_bytes(),
                           headers={"Content-Type": "application/json"}, timeout=120).json()
    done = run(client, "batch", path, live_server)
    assert done.returncode == 0, done.stderr
    lines = done.stdout.splitlines()
    assert lines == expected_batch(answer)
    assert len(lines) == 501 and lines[-2].startswith("store-500: error 422:")  # the stuck till feed


@pytest.mark.parametrize("client", ["curl", "python"], indirect=True)
def test_model_check_prints_the_model_and_the_reading(client, live_server):
    path = DEMO / "dairy_daily_milk_intake_model_check.json"
    answer = requests.post(live_server + "/v1/model-check", data=path.read_bytes(),
                           headers={"Content-Type": "application/json"}, timeout=60).json()
    done = run(client, "model-check", path, live_server)
    assert done.returncode == 0, done.stderr
    c = answer["comparison"]
    assert done.stdout.splitlines() == [
        answer["name"], f"model: {answer['model']['label']} (chosen by {answer['model']['chosen_by']})",
        f"before: {word(c['before']['white_noise'])}", f"residuals: {word(c['after']['white_noise'])}", c["sentence"]]


@pytest.mark.parametrize("client", ["curl", "python"], indirect=True)
def test_stability_prints_the_window_counts_and_the_changes(client, live_server):
    path = DEMO / "bus_line_daily_boardings_stability.json"
    answer = requests.post(live_server + "/v1/stability", data=path.read_bytes(),
                           headers={"Content-Type": "application/json"}, timeout=60).json()
    done = run(client, "stability", path, live_server)
    assert done.returncode == 0, done.stderr
    n = answer["counts"]
    changes = [f"change: {c['kind']} at {c['time']}, p = {c['p_value']}" for c in answer["changes"]["found"]]
    assert changes and done.stdout.splitlines() == [
        answer["name"], f"windows: {n['windows']} ({n['white_noise']} white noise, {n['not_white_noise']} not white "
                        f"noise, {n['undetermined']} undetermined, {n['errors']} {count_word(n['errors'], 'error')})", *changes]


@pytest.mark.parametrize("client", ["curl", "python"], indirect=True)
def test_driver_check_prints_each_driver_and_its_key_lags(client, live_server):
    path = DEMO / "district_heating_daily_demand_drivers.json"
    answer = requests.post(live_server + "/v1/driver-check", data=path.read_bytes(),
                           headers={"Content-Type": "application/json"}, timeout=60).json()
    done = run(client, "driver-check", path, live_server)
    assert done.returncode == 0, done.stderr
    lines = [f"{d['name']}: linked at lags {', '.join(map(str, d['key_lags']))} ({d['direction']})"
             if d["moves_with_series"] else f"{d['name']}: no link found" for d in answer["drivers"]]
    assert done.stdout.splitlines() == [answer["name"], *lines]
    assert lines[0].endswith("linked at lags 1 (driver_leads)")


def test_problem_details_are_printed_with_their_pointers(client, live_server, tmp_path):
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({"values": [3.5, 1.25, "n/a", 2.0, 4.75], "period": 1}))
    problem = requests.post(live_server + "/v1/diagnostics", data=bad.read_bytes(),
                            headers={"Content-Type": "application/json"}, timeout=60).json()
    done = run(client, "single", bad, live_server)
    assert done.returncode == 2, (done.stdout, done.stderr)
    err = done.stderr.splitlines()
    assert err[0] == f"error 422 ({problem['title']}): {problem['detail']}"
    assert [line.strip() for line in err[1:]] == [f"{e['pointer']}: {e['detail']}" for e in problem["errors"]]
    assert {"/values/2", "/period"} <= {e["pointer"] for e in problem["errors"]}
    assert done.stdout == ""


def test_a_server_that_never_answers_ends_in_the_clients_timeout(client, tmp_path):
    with socket.socket() as silent:  # accepts connections (kernel backlog) and never replies
        silent.bind(("127.0.0.1", 0))
        silent.listen(8)
        base = f"http://127.0.0.1:{silent.getsockname()[1]}"
        done = run(client, "single", DEMO / "bakery_daily_residuals.json", base, timeout_s=1)
    assert done.returncode == 3, (done.stdout, done.stderr)
    assert "no answer" in done.stderr and "within 1 s" in done.stderr


def test_the_token_is_sent_where_the_deployment_requires_one(client, guarded_server):
    path = DEMO / "farm_shop_short_monthly_residuals.json"
    refused = run(client, "single", path, guarded_server)
    assert refused.returncode == 2 and refused.stderr.startswith("error 401 ("), refused.stderr
    done = run(client, "single", path, guarded_server, token="team-ops-7f3a")
    assert done.returncode == 0, done.stderr
    assert done.stdout.splitlines()[1] == "verdict: white noise"


def test_powershell_script_parses():
    """tree-sitter-powershell finds no syntax error; a broken copy shows the check can fail."""
    import tree_sitter
    import tree_sitter_powershell

    parser = tree_sitter.Parser(tree_sitter.Language(tree_sitter_powershell.language()))
    source = (EXAMPLES / "Lagsight.ps1").read_bytes()
    tree = parser.parse(source)

    def errors(node, out):
        if node.type == "ERROR" or node.is_missing:
            out.append(f"line {node.start_point[0] + 1}: {node.type}")
        for child in node.children:
            errors(child, out)
        return out

    assert errors(tree.root_node, []) == []
    broken = source.replace(b"if ($Token) {", b"if ($Token {", 1)
    assert broken != source and parser.parse(broken).root_node.has_error


def test_spreadsheet_macro_parses_as_vba():
    """The VBA grammar of antlr4-vba (startRule: a module file) reports no syntax error.

    It caught a module-level variable declared after the procedures while the macro was written.
    """
    from antlr4 import CommonTokenStream, InputStream
    from antlr4.error.ErrorListener import ErrorListener
    from antlr4_vba.vbaLexer import vbaLexer
    from antlr4_vba.vbaParser import vbaParser

    class Collect(ErrorListener):
        def __init__(self):
            super().__init__()
            self.errors = []

        def syntaxError(self, recognizer, offending, line, column, msg, e):
            self.errors.append(f"{line}:{column} {msg}")

    source = (EXAMPLES / "LagsightMacro.bas").read_text(encoding="utf-8")
    found = Collect()
    lexer = vbaLexer(InputStream(source))
    lexer.removeErrorListeners()
    lexer.addErrorListener(found)
    parser = vbaParser(CommonTokenStream(lexer))
    parser.removeErrorListeners()
    parser.addErrorListener(found)
    parser.startRule()
    assert found.errors == []
    for sub in ("CheckSelectedColumn", "CheckSelectedColumns"):
        assert f"Public Sub {sub}()" in source

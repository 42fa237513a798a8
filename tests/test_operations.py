"""Operations: settings, readiness, metrics, request ids and JSON logs that never carry series values."""
from __future__ import annotations

import io
import json
import logging
import re
from pathlib import Path

import pytest

from lagsight import __version__, config, create_app
from lagsight.web.observability import JsonFormatter

from .spec_tools import spec

ROOT = Path(__file__).resolve().parents[1]
URL = "/v1/diagnostics"


def test_every_setting_is_in_the_documented_table():
    """docs/CONFIGURATION.md carries the table that config.markdown_table() prints, row for row."""
    text = (ROOT / "docs" / "CONFIGURATION.md").read_text()
    assert config.markdown_table() in text, "regenerate the table with: lagsight settings"
    for entry in config.SETTINGS.values():
        assert entry.var.startswith("LAGSIGHT_") and entry.doc, entry.var


def test_settings_come_from_the_environment_and_are_checked():
    env = {"LAGSIGHT_MAX_POINTS": "500", "LAGSIGHT_CORS_ORIGINS": "https://a.example, https://b.example",
           "LAGSIGHT_LOG_LEVEL": "warning"}
    s = config.load(environ=env)
    assert s["MAX_POINTS"] == 500 and s["CORS_ORIGINS"] == ("https://a.example", "https://b.example")
    assert s["LOG_LEVEL"] == "WARNING" and s["MAX_LAG"] == config.SETTINGS["MAX_LAG"].default
    assert config.load({"MAX_POINTS": 9}, environ=env)["MAX_POINTS"] == 9  # create_app(config) wins
    for var, raw in [("LAGSIGHT_WORKERS", "0"), ("LAGSIGHT_MAX_BODY_BYTES", "lots"), ("LAGSIGHT_LOG_LEVEL", "loud")]:
        with pytest.raises(ValueError, match=var):
            config.load(environ={var: raw})


def test_graceful_timeout_follows_the_timeout_and_is_never_below_it():
    """SIGTERM gives in-flight requests at least as long as the worker timeout lets them run."""
    assert config.load(environ={})["GRACEFUL_TIMEOUT"] == config.load(environ={})["TIMEOUT"] == 60
    assert config.load(environ={"LAGSIGHT_TIMEOUT": "120"})["GRACEFUL_TIMEOUT"] == 120
    assert config.load(environ={"LAGSIGHT_GRACEFUL_TIMEOUT": "90"})["GRACEFUL_TIMEOUT"] == 90
    for env in ({"LAGSIGHT_GRACEFUL_TIMEOUT": "30"}, {"LAGSIGHT_TIMEOUT": "120", "LAGSIGHT_GRACEFUL_TIMEOUT": "90"}):
        with pytest.raises(ValueError, match="LAGSIGHT_GRACEFUL_TIMEOUT=.* is less than LAGSIGHT_TIMEOUT"):
            config.load(environ=env)


def test_cli_refuses_a_timeout_flag_above_the_graceful_timeout(monkeypatch):
    from lagsight.serving import cli

    monkeypatch.setenv("LAGSIGHT_GRACEFUL_TIMEOUT", "60")
    monkeypatch.setattr(cli, "serve", lambda environ: pytest.fail("must not start"))
    with pytest.raises(SystemExit, match="LAGSIGHT_GRACEFUL_TIMEOUT=60 is less than LAGSIGHT_TIMEOUT=90"):
        cli.main(["serve", "--timeout", "90"])


@pytest.mark.parametrize("env, expected", [
    ({}, "60 60 1000 100"),  # the defaults: a full drain, recycling with 10% jitter
    ({"LAGSIGHT_TIMEOUT": "90", "LAGSIGHT_MAX_REQUESTS": "50"}, "90 90 50 5"),
    ({"LAGSIGHT_MAX_REQUESTS": "0"}, "60 60 0 0"),  # recycling off
])
def test_gunicorn_settings_drain_fully_and_recycle_workers_with_jitter(tmp_path, env, expected):
    """What the gunicorn settings module hands gunicorn, read in a fresh interpreter (it sets up the process)."""
    import os
    import subprocess
    import sys

    environ = {k: v for k, v in os.environ.items() if not k.startswith("LAGSIGHT_")}
    environ.update(env, PROMETHEUS_MULTIPROC_DIR=str(tmp_path))
    code = ("import lagsight.serving.gunicorn_conf as c\n"
            "print(c.timeout, c.graceful_timeout, c.max_requests, c.max_requests_jitter)")
    out = subprocess.run([sys.executable, "-c", code], env=environ, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip().splitlines()[-1] == expected


def test_readyz_runs_the_engine_self_check(client):
    r = client.get("/readyz")
    body = r.get_json()
    assert r.status_code == 200 and body["status"] == "ready" and body["version"] == __version__
    assert body["self_check"]["ok"] is True
    assert body["self_check"]["lag1_autocorrelation"] == -0.5  # NIST StRD NumAcc1, certified value


def test_readyz_is_503_problem_when_the_engine_fails(client, monkeypatch):
    import lagsight.engine.analysis as analysis

    def broken(*args, **kwargs):
        raise FloatingPointError("simulated engine fault")

    monkeypatch.setattr(analysis, "analyse", broken)
    r = client.get("/readyz")
    assert r.status_code == 503 and r.mimetype == "application/problem+json"
    assert r.get_json()["type"] == "urn:lagsight:problem:unavailable"


def _sample(text: str, name: str, labels: dict) -> float:
    want = ",".join(f'{k}="{v}"' for k, v in sorted(labels.items()))
    for line in text.splitlines():
        m = re.fullmatch(rf"{name}\{{(.*)\}} (\S+)", line)
        if m and ",".join(sorted(m.group(1).split(","))) == want:
            return float(m.group(2))
        if not labels and line.startswith(name + " "):
            return float(line.split()[1])
    return 0.0


def test_metrics_count_requests_by_route_and_status_and_points_analysed(client):
    before = client.get("/metrics").get_data(as_text=True)
    client.post(URL, json={"values": [1, 3, 2, 5, 4, 6, 3, 2]})
    client.post(URL, json={"values": [1, 3, 2, 5, 4]})
    client.post(URL, json={"values": "nope"})
    client.get("/no/such/route")
    r = client.get("/metrics")
    assert r.status_code == 200 and r.mimetype == "text/plain"
    after = r.get_data(as_text=True)
    ok = {"route": URL, "method": "POST", "status": "200"}
    bad = {"route": URL, "method": "POST", "status": "422"}
    lost = {"route": "(unmatched)", "method": "GET", "status": "404"}
    for labels, n in [(ok, 2), (bad, 1), (lost, 1)]:
        assert _sample(after, "lagsight_http_requests_total", labels) - _sample(before, "lagsight_http_requests_total", labels) == n
        assert _sample(after, "lagsight_http_request_duration_seconds_count", labels) - _sample(
            before, "lagsight_http_request_duration_seconds_count", labels) == n
    assert _sample(after, "lagsight_series_analysed_total", {}) - _sample(before, "lagsight_series_analysed_total", {}) == 2
    assert _sample(after, "lagsight_points_analysed_total", {}) - _sample(before, "lagsight_points_analysed_total", {}) == 13
    assert 'le="60.0"' in after  # histogram buckets reach the default worker timeout


@pytest.mark.parametrize("given,echoed", [
    ("order-42.retry:1", True),
    ("x" * 128, True),
    ("x" * 129, False),
    ("has space", False),
    ("new\\nline", False),
    ("", False),
])
def test_request_id_is_echoed_when_plain_and_made_otherwise(client, given, echoed):
    r = client.get("/healthz", headers={"X-Request-ID": given} if given else {})
    rid = r.headers["X-Request-ID"]
    assert (rid == given) is echoed
    assert re.fullmatch(r"[A-Za-z0-9._:-]{1,128}", rid)


@pytest.fixture
def log_lines():
    stream = io.StringIO()
    handler = logging.StreamHandler(stream)
    handler.setFormatter(JsonFormatter())
    logger = logging.getLogger("lagsight")
    logger.addHandler(handler)
    yield lambda: [json.loads(line) for line in stream.getvalue().splitlines()]
    logger.removeHandler(handler)


def test_access_log_is_json_with_request_id_and_no_series_values(client, log_lines):
    marker = [271828.1828, -314159.2653, 141421.3562, 173205.0807, 223606.7977]
    client.post(URL, json={"values": marker, "name": "north depot"}, headers={"X-Request-ID": "trace-7"})
    client.post(URL, json={"values": marker + ["oops"]}, headers={"X-Request-ID": "trace-8"})
    lines = log_lines()
    access = [e for e in lines if e["logger"] == "lagsight.access"]
    assert [(e["request_id"], e["status"], e["route"]) for e in access] == [("trace-7", 200, URL), ("trace-8", 422, URL)]
    assert all(e["duration_ms"] >= 0 and e["request_bytes"] > 0 for e in access)
    text = json.dumps(lines)
    assert not any(str(v).split(".")[0] in text for v in marker)
    assert "north depot" not in text


def test_a_crash_is_a_500_problem_and_its_log_does_not_quote_the_data(client, log_lines, monkeypatch):
    import lagsight.web.diagnostics as view

    def crash(*args, **kwargs):
        raise ValueError("could not use 271828.1828 from the request")

    monkeypatch.setattr(view, "single_answer", crash)
    r = client.post(URL, json={"values": [271828.1828, 2, 1, 3]}, headers={"X-Request-ID": "crash-1"})
    assert r.status_code == 500 and r.mimetype == "application/problem+json"
    assert r.get_json()["type"] == "urn:lagsight:problem:internal-error"
    assert r.headers["X-Request-ID"] == "crash-1" and r.headers["X-Content-Type-Options"] == "nosniff"
    crash_lines = [e for e in log_lines() if e["message"] == "unhandled error"]
    assert crash_lines and crash_lines[0]["exception"] == "ValueError" and crash_lines[0]["request_id"] == "crash-1"
    assert "271828" not in json.dumps(log_lines())


def test_version_header_on_every_response(client):
    for r in (client.get("/healthz"), client.get("/nowhere"), client.post(URL, data="{")):
        assert r.headers["X-Lagsight-Version"] == __version__


def test_operations_routes_are_in_the_spec():
    paths = spec()["paths"]
    assert "/readyz" in paths and "/metrics" in paths and "text/plain" in paths["/metrics"]["get"]["responses"]["200"]["content"]


def test_cli_prints_the_settings_table(capsys):
    from lagsight.serving.cli import main

    main(["settings"])
    assert capsys.readouterr().out == config.markdown_table()


def test_bad_setting_stops_the_factory():
    with pytest.raises(ValueError, match="LAGSIGHT_AUTH_TOKENS_FILE"):
        create_app({"TESTING": True, "AUTH_TOKENS_FILE": "/nonexistent/tokens"})


@pytest.mark.parametrize("given, expected", [(None, 1), ("3", 3)])
def test_gunicorn_workers_run_blas_on_one_thread_unless_told_otherwise(tmp_path, given, expected):
    """The gunicorn settings module sets the BLAS thread variables before NumPy loads (checked in a
    fresh interpreter, where NumPy's BLAS reads them); an operator's own value is kept."""
    import os
    import subprocess
    import sys

    env = {k: v for k, v in os.environ.items()
           if k not in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")}
    env["PROMETHEUS_MULTIPROC_DIR"] = str(tmp_path)
    if given is not None:
        env["OPENBLAS_NUM_THREADS"] = given
    code = ("import lagsight.serving.gunicorn_conf, numpy\n"
            "from threadpoolctl import threadpool_info\n"
            "print(max(i['num_threads'] for i in threadpool_info() if i['user_api'] == 'blas'))")
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert int(out.stdout.split()[-1]) == min(expected, os.cpu_count() or 1)


def test_gunicorn_master_freezes_the_preloaded_app_before_forking(tmp_path):
    """pre_fork moves the loaded application's objects out of the collector's generations (gc.freeze),
    so a worker's full collection does not walk them; checked in a fresh interpreter."""
    import os
    import subprocess
    import sys

    env = dict(os.environ, PROMETHEUS_MULTIPROC_DIR=str(tmp_path))
    code = ("import gc, lagsight.serving.gunicorn_conf as conf\n"
            "from lagsight.serving.wsgi import app\n"
            "before = any(o is app for o in gc.get_objects())\n"
            "conf.pre_fork(None, None)\n"
            "after = any(o is app for o in gc.get_objects())\n"
            "print(before, after, gc.is_tracked(app), gc.get_freeze_count() > 10000)")
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.split()[-4:] == ["True", "False", "True", "True"]


def test_gunicorn_workers_keep_freed_array_memory_for_reuse(tmp_path):
    """With the gunicorn settings loaded, engine blocks after the first reuse the pages freed by the
    ones before (almost no new page faults). With LAGSIGHT_HEAP_KEEP_MB=0 the C library's defaults apply:
    whether they fault the arrays in again depends on the dynamic mmap threshold that earlier frees have
    raised, which the engine's own temporaries now often do, so that count is only shown. Checked in fresh
    interpreters."""
    import os
    import platform
    import subprocess
    import sys

    if platform.libc_ver()[0] != "glibc":
        pytest.skip("mallopt thresholds are glibc's")
    code = ("import resource, numpy as np, lagsight.serving.gunicorn_conf\n"
            "from lagsight.engine.analysis import Spec, analyse\n"
            "x = np.random.default_rng(5).standard_normal((2184, 120))\n"
            "spec = Spec(max_lag=24, confidence=0.95, model_df=0, test_lags=(12, 24), short_lag=24, period=12)\n"
            "analyse(x, spec)\n"
            "before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt\n"
            "for _ in range(4):\n"
            "    analyse(x, spec)\n"
            "print(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before)")
    counts = {}
    for keep in ("64", "0"):
        env = dict(os.environ, PROMETHEUS_MULTIPROC_DIR=str(tmp_path), LAGSIGHT_HEAP_KEEP_MB=keep)
        out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=120)
        assert out.returncode == 0, out.stderr
        counts[keep] = int(out.stdout.split()[-1])
    assert counts["64"] < 100 and counts["64"] <= counts["0"] + 20, counts

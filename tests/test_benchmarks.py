"""The benchmark code runs end to end on tiny sizes and writes a complete report (no timing is asserted)."""
from __future__ import annotations

import json

import pytest

from benchmarks import report, run


@pytest.mark.slow
def test_quick_benchmark_run_writes_every_measurement(tmp_path):
    out = tmp_path / "BENCHMARKS.md"
    out.write_text(f"# old\n{report.NOTES_START}\nkept analysis\n{report.NOTES_END}\n")
    results = run.main(["--quick", "--out", str(out), "--load", "python"])
    text = out.read_text()
    for heading in ("## Machine", "## Targets", "## 1.", "## 2.", "## 3.", "## 4.", "## 5.", "## Analysis"):
        assert heading in text, heading
    assert "kept analysis" in text and "Quick run" in text
    assert json.loads(out.with_suffix(".json").read_text())["quick"] is True
    # Each measurement produced positive numbers, and the HTTP batch answered every series.
    assert all(v["median"] > 0 for v in results["batch"]["times"].values())
    assert results["http_batch"]["summary"]["series"] == results["batch"]["m"]
    assert results["throughput"]["median"]["diagnosis"]["rps"] > 0
    assert results["long_memory"]["peak_increase_kib"] is not None
    assert len(report.targets(results)) >= 9


@pytest.mark.slow
def test_engine_free_what_if_serves_the_same_reports_from_its_cache():
    """benchmarks.ceiling's server caches the engine's result: the diagnosis it serves is the real one,
    byte for byte, on the first request and on a cached repeat (so its requests/s bound is about the
    same work minus the engine)."""
    import orjson

    from benchmarks import ceiling, workloads
    from benchmarks.http_bench import post
    from benchmarks.server import Server

    body = orjson.dumps({"values": workloads.batch(3, 120)[0].tolist(), "period": 12})
    answers = []
    for app in ("benchmarks.noop_app:app", "benchmarks.engine_free_app:app"):
        with Server(workers=1, app=app) as server:
            answers.append(post(server, "/v1/diagnostics", body))
            answers.append(post(server, "/v1/diagnostics", body))
    assert len(set(answers)) == 1
    result = ceiling.measure(seconds=1, rounds=1, connections=2)
    assert result["engine"]["diagnosis_rps"] > 0 and result["engine_free"]["diagnosis_rps"] > 0


def test_cost_model_script_prints_estimate_and_measurement(capsys):
    """benchmarks.cost_model (how web/budget.py's coefficients are checked) runs its quick cases."""
    from benchmarks import cost_model

    cost_model.main(["--quick"])
    rows = [line.split() for line in capsys.readouterr().out.splitlines()[1:] if line.strip()]
    assert len(rows) == len(cost_model.QUICK)
    assert all(float(row[-3]) > 0 and float(row[-2]) > 0 for row in rows)  # estimate and measured time


@pytest.mark.slow
def test_dask_benchmark_writes_its_section_and_make_bench_keeps_it(tmp_path):
    from benchmarks import dask_bench

    out = tmp_path / "BENCHMARKS.md"
    out.write_text(f"# old\n\n## Analysis\n\n{report.NOTES_START}\nkept analysis\n{report.NOTES_END}\n")
    result = dask_bench.main(["--quick", "--out", str(out)])
    assert result["equal"] and all(t > 0 for runs in result["runs"].values() for t in runs)
    text = out.read_text()
    assert text.index(report.DASK_START) < text.index("## Analysis") and "series/s" in text
    dask_bench.write(dask_bench.section(result), out)  # a second run replaces the section
    assert out.read_text().count(report.DASK_START) == 1
    kept = report.kept_dask_section(out.read_text())  # what make bench carries into the regenerated report
    assert kept[0].startswith(report.DASK_START) and kept[0].endswith(report.DASK_END) and "series/s" in kept[0]


def test_shape_benchmark_cases_run_and_its_section_is_kept(tmp_path):
    """The answer-size case runs on this code; the section reads a results dict and make bench keeps it (the
    in-process and memory cases run in `python -m benchmarks.shape_bench --quick --no-write`, too slow here)."""
    from benchmarks import shape_bench

    sizes = shape_bench.case_bytes(3)
    assert 2_000 < sizes["batch_per_series"] < sizes["single"] < 16_000
    row = {"ratio": 2.0, "engine_s": 1.0, "full_s": 2.0, "answer_bytes": 2**20}
    memory = {"peak_mib": 300.0, "rss_before_mib": 100.0, "answer_mib": 5.0, "request_mib": 2.0}
    results = {"base": "0" * 40, "rounds": 1, "sizes": {"bytes": 3, "in_process": 10, "memory": 10},
               "cases": {"bytes": {"base": [{"single": 29_000, "batch_per_series": 28_000}], "now": [sizes]},
                         "in_process": {"base": [row], "now": [row]},
                         "memory": {"base": [{**memory, "peak_mib": 900.0}], "now": [memory]}}}
    out = tmp_path / "BENCHMARKS.md"
    out.write_text(f"# old\n\n## Analysis\n\n{report.NOTES_START}\nkept\n{report.NOTES_END}\n")
    shape_bench.write(shape_bench.section(results), out)
    shape_bench.write(shape_bench.section(results), out)  # a second run replaces the section
    text = out.read_text()
    assert text.count(report.SHAPE_START) == 1 and text.index(report.SHAPE_START) < text.index("## Analysis")
    assert "3.0x lower: met" in text and "| <= 8 KB |" in text
    kept = report.kept_shape_section(text)
    assert kept[0].startswith(report.SHAPE_START) and kept[0].endswith(report.SHAPE_END)

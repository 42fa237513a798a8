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

"""The two commands a new user runs: `make serve` installs only what serving needs, `make test` the test extras and
the programs from apt that README names; the suite runs without the browser and client tests by marker."""
from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
MAKEFILE = (ROOT / "Makefile").read_text()
README = (ROOT / "README.md").read_text()


def _dry_run(target: str, tmp_path: Path) -> list[str]:
    """The commands `make <target>` would run on a machine without a virtual environment yet (make -n)."""
    done = subprocess.run(["make", "-n", target, f"VENV={tmp_path / 'venv'}"], cwd=ROOT, capture_output=True,
                          text=True, timeout=60)
    assert done.returncode == 0, done.stderr
    # Run from inside another make (make test runs this suite), make prints "Entering/Leaving directory" lines.
    return [line for line in done.stdout.splitlines()
            if not re.match(r"make(\[\d+\])?: (Entering|Leaving) directory", line)]


def test_make_serve_installs_the_package_without_the_test_extras(tmp_path):
    lines = _dry_run("serve", tmp_path)
    installs = [line for line in lines if "pip install" in line and "-e " in line]
    assert len(installs) == 1 and installs[0].rstrip().endswith("-e .") and "[test]" not in installs[0]
    assert not any("apt-get" in line for line in lines)
    assert any("lagsight serve" in line for line in lines)


def test_make_test_installs_the_test_extras_and_the_programs_from_apt(tmp_path):
    lines = _dry_run("test", tmp_path)
    assert any("pip install" in line and "'.[test]'" in line for line in lines)
    assert any("apt-get" in line for line in lines) and lines[-1].endswith("-m pytest")


def test_make_test_core_runs_without_the_programs_from_apt(tmp_path):
    lines = _dry_run("test-core", tmp_path)
    assert not any("apt-get" in line for line in lines)
    assert lines[-1].endswith('-m pytest -m "not browser and not clients"')


def test_readme_names_every_program_make_test_installs_and_the_recipe_without_them():
    packages = re.search(r"^SYSTEM_TOOLS := (.*)$", MAKEFILE, re.M).group(1).split()
    section = README.split("## Two commands", 1)[1].split("\n## ", 1)[0]
    for pair in packages:
        assert f"`{pair.split(':')[1]}`" in section, pair
    extras = re.search(r"^test = \[(.*?)^\]", (ROOT / "pyproject.toml").read_text(), re.S | re.M).group(1)
    assert "test extras" in section and "pyproject.toml" in section and extras.strip()
    assert "make test-core" in section and 'pytest -m "not browser and not clients"' in section


def _collected(*args: str) -> set[str]:
    done = subprocess.run([sys.executable, "-m", "pytest", "--collect-only", "-q", "-p", "no:cacheprovider", *args],
                          cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert done.returncode in (0, 5), done.stdout[-2000:] + done.stderr[-2000:]  # 5: nothing collected
    return {line.split("::")[0] for line in done.stdout.splitlines() if "::" in line}


def test_the_markers_leave_out_exactly_the_browser_and_client_tests():
    files = ["tests/test_page_browser.py", "tests/test_client_examples.py", "tests/test_page.py"]
    assert _collected(*files) == set(files)
    assert _collected("-m", "not browser and not clients", *files) == {"tests/test_page.py"}


def test_every_test_file_that_needs_a_program_from_apt_carries_its_marker():
    """A file that launches chromium is marked browser; one that runs the example clients is marked clients."""
    for path in sorted((ROOT / "tests").glob("test_*.py")):
        text = path.read_text()
        if "sync_playwright" in text or "/usr/bin/chromium" in text:
            assert "pytest.mark.browser" in text, path.name
        if "client_examples" in text and ("javac" in text or '"node"' in text):
            assert "pytest.mark.clients" in text, path.name

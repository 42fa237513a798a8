"""The tree shows the flow: one folder per stage, imports one way, small modules, each stage says its rule.

The import rule itself is pyproject.toml's import-linter contracts; this test runs them, so `make test` fails
the moment an import runs against the flow.
"""
from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "service" / "lagsight"
STAGES = ("web", "inputs", "engine", "consult", "outputs", "serving")
SHARED = {"__init__.py", "app.py", "api.py", "handling.py", "follow_up.py", "tables.py", "distributed.py", "pipeline.py", "options.py",
          "config.py", "problems.py", "version.py"}
BIN = Path(sys.executable).parent


def test_the_import_contracts_hold():
    run = subprocess.run([str(BIN / "lint-imports"), "--config", str(ROOT / "pyproject.toml")], cwd=ROOT,
                         capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stdout[-4000:] + run.stderr[-2000:]
    assert "BROKEN" not in run.stdout


def test_the_package_folder_holds_only_the_shared_modules_and_one_folder_per_stage():
    modules = {p.name for p in PACKAGE.glob("*.py")}
    folders = {p.name for p in PACKAGE.iterdir() if p.is_dir() and not p.name.startswith((".", "__"))}
    assert modules == SHARED
    assert folders == set(STAGES)


@pytest.mark.parametrize("stage", STAGES)
def test_each_stage_says_what_it_does_and_what_it_may_import(stage):
    doc = ast.get_docstring(ast.parse((PACKAGE / stage / "__init__.py").read_text()))
    assert doc and "import" in doc.lower(), f"{stage}/__init__.py needs a docstring that states its import rule"


def test_no_module_is_much_over_350_lines():
    long = {str(p.relative_to(PACKAGE)): n for p in PACKAGE.rglob("*.py")
            if (n := len(p.read_text().splitlines())) > 360}
    assert not long


def test_no_private_name_is_imported_across_modules():
    crossing = []
    for path in PACKAGE.rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.ImportFrom) and (node.module or "").startswith("lagsight"):
                crossing += [f"{path.relative_to(PACKAGE)}: {a.name}" for a in node.names
                             if a.name.startswith("_") and not a.name.startswith("__")]
    assert not crossing


def test_no_unused_names_and_imports_in_order():
    run = subprocess.run([str(BIN / "ruff"), "check", "--select", "F,I", "--no-cache", "service", "tests", "benchmarks",
                          "ops", "calibration" if (ROOT / "calibration").is_dir() else "service"],
                         cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stdout[-4000:]

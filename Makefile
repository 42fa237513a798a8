# Lagsight: the two commands a new user runs are `make serve` and `make test`.
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
HOST   ?= 127.0.0.1
PORT   ?= 8000
WORKERS ?= 2
# Two installs: serving needs only the package; the suite adds the test extras (which include everything serving needs).
SERVE_STAMP := $(VENV)/.installed-serve
TEST_STAMP  := $(VENV)/.installed-test

# Programs the tests run, as command:Debian package (browser tests, example clients).
SYSTEM_TOOLS := chromium:chromium node:nodejs curl:curl jq:jq javac:default-jdk-headless

.PHONY: serve test test-core install install-test lock clean bench screenshots system-tools

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

# Reinstall when the project's own install files change.
$(SERVE_STAMP): $(BIN)/python pyproject.toml constraints.txt
	$(BIN)/python -m pip install --quiet -c constraints.txt -e .
	touch $(SERVE_STAMP)

$(TEST_STAMP): $(BIN)/python pyproject.toml constraints.txt
	$(BIN)/python -m pip install --quiet -c constraints.txt -e '.[test]'
	touch $(TEST_STAMP) $(SERVE_STAMP)

install: $(SERVE_STAMP)

install-test: $(TEST_STAMP)

serve: $(SERVE_STAMP)
	$(BIN)/lagsight serve --host $(HOST) --port $(PORT) --workers $(WORKERS)

# Install the programs the tests run when one is missing (needs root and apt; once per machine).
system-tools:
	@missing=""; for pair in $(SYSTEM_TOOLS); do \
	  command -v "$${pair%%:*}" >/dev/null 2>&1 || missing="$$missing $${pair#*:}"; done; \
	if [ -n "$$missing" ]; then \
	  echo "installing:$$missing"; \
	  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends $$missing; \
	fi

test: $(TEST_STAMP) system-tools
	$(BIN)/python -m pytest

# The suite without the tests that need programs from apt (the browser tests and the example clients).
test-core: $(TEST_STAMP)
	$(BIN)/python -m pytest -m "not browser and not clients"

# Refresh the page screenshots in docs/ (the browser tests write them there).
screenshots: $(TEST_STAMP) system-tools
	LAGSIGHT_SCREENSHOTS=docs $(BIN)/python -m pytest tests/test_page_browser.py -q

# Run every example in README.md, docs/, client_examples/README.md and demo_payloads/README.md against a fresh
# server and rewrite their shown outputs (tests/test_doc_examples.py fails when one differs).
.PHONY: docs-examples
docs-examples: $(TEST_STAMP) system-tools
	$(BIN)/python -m tests.doc_examples

# Speed and memory measurements (a few minutes; gunicorn on 127.0.0.1, wrk when installed): writes BENCHMARKS.md.
bench: $(TEST_STAMP)
	command -v wrk >/dev/null || (apt-get install -y wrk >/dev/null 2>&1 || true)
	$(BIN)/python -m benchmarks.run

# How often the verdict, named structure and advice are right, by seeded simulation (~10 minutes): writes CALIBRATION.md.
.PHONY: calibrate
calibrate: $(TEST_STAMP)
	$(BIN)/python -m calibration.run

# Refresh constraints.txt from a fresh resolution of pyproject.toml's ranges.
lock:
	rm -rf /tmp/lagsight-lock && $(PYTHON) -m venv /tmp/lagsight-lock
	/tmp/lagsight-lock/bin/pip install --quiet '.[test]'
	{ echo "# Exact versions for reproducible installs (pip -c). Update with: make lock"; \
	  /tmp/lagsight-lock/bin/pip freeze --exclude lagsight; } > constraints.txt

clean:
	rm -rf $(VENV) .pytest_cache build service/*.egg-info

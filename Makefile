# Set-up is part of every target: a fresh machine needs only python3.
PYTHON ?= python3
VENV ?= .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
DEMO ?= scenarios/trail_air.toml

.PHONY: demo test lint typecheck kernels unit bench clean reliability system

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[dev]'
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/tuneopt check $(DEMO)
	rm -rf out/demo
	$(BIN)/tuneopt optimise $(DEMO) --workers 2 --out out/demo

lint: $(STAMP)
	$(BIN)/ruff check .

typecheck: $(STAMP)
	$(BIN)/mypy tuneopt

# The simulator's kernels compiled into numba's cache once (loaded from it when it is current),
# not by every test process at once.
kernels: $(STAMP)
	$(BIN)/python tools/compile_kernels.py

# four test processes on two cores: the service tests spend much of their time waiting on the
# processes they start (a file stays on one test process: its fixtures and services are its
# own).
TEST_WORKERS ?= 4
unit: kernels
	$(BIN)/python -m pytest -q -n $(TEST_WORKERS) --dist loadfile --durations=15

# redis-server and chromium: installed when missing (Debian, as root), else named
system:
	sh tools/system-packages.sh

# ruff and mypy run while the kernels compile (the half-car's compile alone takes minutes)
test: system
	$(MAKE) --no-print-directory -j 3 --output-sync=target lint typecheck kernels
	$(MAKE) --no-print-directory unit

# The reliability and security suites at full size (bad input through files, the command line and
# the API; schema-driven API fuzzing; load; faults), each test recording what it measured;
# the figures end up as a Markdown table in $(FIGURES)/reliability.md (the README's Reliability
# section). make test runs the same suites at a reduced size.
FUZZ_EXAMPLES ?= 2000
API_FUZZ_EXAMPLES ?= 200
LOAD_JOBS ?= 200
LOAD_READS ?= 3000
FAULT_ROUNDS ?= 3
FIGURES ?= out/figures
reliability: $(STAMP) system
	rm -rf $(FIGURES) && mkdir -p $(FIGURES)
	TUNEOPT_FIGURES=$(FIGURES)/figures.jsonl TUNEOPT_FUZZ_EXAMPLES=$(FUZZ_EXAMPLES) \
	TUNEOPT_API_FUZZ_EXAMPLES=$(API_FUZZ_EXAMPLES) TUNEOPT_LOAD_JOBS=$(LOAD_JOBS) \
	TUNEOPT_LOAD_READS=$(LOAD_READS) TUNEOPT_FAULT_ROUNDS=$(FAULT_ROUNDS) \
		$(BIN)/python -m pytest -q --timeout 3600 tests/reliability tests/service \
		"tests/optimise/test_runner.py::test_resumed_run_equals_an_uninterrupted_run"
	$(BIN)/python -m tests.figures $(FIGURES)/figures.jsonl > $(FIGURES)/reliability.md
	cat $(FIGURES)/reliability.md

bench: $(STAMP)
	$(BIN)/tuneopt bench

clean:
	rm -rf $(VENV) .pytest_cache .mypy_cache .ruff_cache

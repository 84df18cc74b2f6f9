# Set-up is part of every target: a fresh machine needs only python3.
PYTHON ?= python3
VENV ?= .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
DEMO ?= scenarios/trail_air.toml

.PHONY: demo test lint typecheck unit bench clean reliability

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[dev]'
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/tuneopt check $(DEMO)
	rm -rf out/demo
	$(BIN)/tuneopt optimise $(DEMO) --trials 300 --workers 2 --out out/demo

lint: $(STAMP)
	$(BIN)/ruff check .

typecheck: $(STAMP)
	$(BIN)/mypy tuneopt

unit: $(STAMP)
	$(BIN)/python -m pytest -q

test: lint typecheck unit

# The reliability suite at full size (bad input fuzzing, limits property); make test runs it small.
FUZZ_EXAMPLES ?= 2000
reliability: $(STAMP)
	TUNEOPT_FUZZ_EXAMPLES=$(FUZZ_EXAMPLES) $(BIN)/python -m pytest tests/reliability -q \
		--hypothesis-show-statistics

bench: $(STAMP)
	$(BIN)/tuneopt bench

clean:
	rm -rf $(VENV) .pytest_cache .mypy_cache .ruff_cache

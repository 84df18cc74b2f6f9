# Set-up is part of every target: a fresh machine needs only python3.
PYTHON ?= python3
VENV ?= .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
DEMO ?= scenarios/trail_air.toml

.PHONY: demo test lint typecheck unit bench clean

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

bench: $(STAMP)
	$(BIN)/tuneopt bench

clean:
	rm -rf $(VENV) .pytest_cache .mypy_cache .ruff_cache

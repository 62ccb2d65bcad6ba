# Set-up and everyday commands. Only python3 is needed on a fresh machine:
# every target creates .venv and installs what it needs.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed-test

.PHONY: demo test lint bench clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $@

demo: $(STAMP)
	$(BIN)/noisechain demo --out demo-output

test: $(STAMP) lint
	$(BIN)/python -m pytest

lint: $(STAMP)
	$(BIN)/ruff check simulator tests

bench: $(STAMP)
	for script in tests/benchmarks/bench_*.py; do $(BIN)/python $$script || exit 1; done

clean:
	rm -rf $(VENV) demo-output .pytest_cache .hypothesis

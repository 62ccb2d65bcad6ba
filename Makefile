# Set-up and everyday commands. Only python3 is needed on a fresh machine:
# every target creates its virtual environment and installs what it needs.
#
# By default the versions in constraints.txt (tested together) are installed;
# `make test-latest` runs the suite against the newest versions pip resolves
# today, in .venv-latest, and `make constraints` refreshes constraints.txt
# from those newest versions once the suite passes with them.
PYTHON ?= python3
VENV ?= .venv
CONSTRAINTS ?= constraints.txt
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed-test

.PHONY: demo test test-latest constraints lint bench clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)

$(STAMP): pyproject.toml $(CONSTRAINTS) | $(BIN)/python
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet $(if $(CONSTRAINTS),-c $(CONSTRAINTS)) -e '.[test]'
	touch $@

demo: $(STAMP)
	$(BIN)/noisechain demo --out demo-output

test: $(STAMP) lint
	$(BIN)/python -m pytest

test-latest:
	rm -rf .venv-latest
	$(MAKE) test VENV=.venv-latest CONSTRAINTS=

constraints:
	rm -rf .venv-refresh
	$(MAKE) test VENV=.venv-refresh CONSTRAINTS=
	{ sed -n '/^#/p' constraints.txt; \
	  .venv-refresh/bin/python -m pip freeze --exclude-editable | grep -iv '^noisechain'; \
	} > constraints.txt.new
	sed -i "s/^# Tested on .*/# Tested on $$(uname -s) $$(uname -m), CPython $$(.venv-refresh/bin/python -c 'import platform; print(platform.python_version())'), $$(date -u +%F)./" constraints.txt.new
	mv constraints.txt.new constraints.txt

lint: $(STAMP)
	$(BIN)/ruff check simulator tests

bench: $(STAMP)
	for script in tests/benchmarks/bench_*.py; do $(BIN)/python $$script || exit 1; done

clean:
	rm -rf $(VENV) .venv-latest .venv-refresh demo-output .pytest_cache .hypothesis

# Two entry points: `make demo` and `make test`. Each creates .venv on first use and installs the
# project from pyproject.toml: the tool alone for the demo, with its test extra for the tests.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
APP_STAMP := $(VENV)/.installed-app

.PHONY: demo test lint bench clean

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $(STAMP)

$(APP_STAMP): pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e .
	touch $(APP_STAMP)

demo: $(APP_STAMP)
	$(BIN)/mapper demo --out demo_out

test: $(STAMP)
	$(BIN)/ruff check mapper tests benchmarks sample_sites
	$(BIN)/python -m pytest

bench: $(STAMP)
	$(BIN)/python benchmarks/field.py

clean:
	rm -rf $(VENV) demo_out .pytest_cache

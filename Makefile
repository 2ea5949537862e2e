# Every target creates the virtual environment on first use, so a fresh clone
# needs nothing but Python 3.11 (or newer) on the PATH.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test lint bench docs workbooks clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/rootvar compile
	$(BIN)/rootvar demo

lint: $(STAMP)
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .

test: lint
	$(BIN)/python -m pytest

bench: $(STAMP)
	$(BIN)/python -m benchmarks

docs: $(STAMP)
	$(BIN)/sphinx-build -W --keep-going -b html docs docs/_build/html

workbooks: $(STAMP)
	$(BIN)/rootvar build-workbooks --dir workbooks

clean:
	rm -rf $(VENV) .pytest_cache .ruff_cache .hypothesis out docs/_build

# springback: the two commands of the quick start, and a few for contributors.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed
TSTAMP := $(VENV)/.installed-test

.PHONY: demo test lint bench translations clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e .
	touch $@

$(TSTAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e ".[test,cluster]"
	touch $@ $(STAMP)

## demo: set up, build the example study's booklets, print where they are
demo: $(STAMP)
	$(BIN)/springback build example_project

## test: set up with test extras, then run the whole suite
test: $(TSTAMP)
	$(BIN)/ruff check src tests benchmarks example_project
	$(BIN)/mypy
	$(BIN)/python -m pytest -n 2 --dist loadgroup

lint: $(TSTAMP)
	$(BIN)/ruff check src tests benchmarks example_project
	$(BIN)/mypy

bench: $(TSTAMP)
	$(BIN)/python benchmarks/run.py

translations: $(TSTAMP)
	$(BIN)/springback translations

clean:
	rm -rf $(VENV) example_project/out build *.egg-info src/*.egg-info

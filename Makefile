# `make demo`, `make test` and `make lint` (ruff check, ruff format --check, mypy). Both bootstrap .venv themselves.
PYTHON ?= $(shell command -v python3.11 || command -v python3)
VENV   := .venv
BIN    := $(VENV)/bin
STAMP_BASE := $(VENV)/.installed-base
STAMP_TEST := $(VENV)/.installed-test

.PHONY: demo test lint bench clips clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP_BASE): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e .
	$(BIN)/python -m compileall -q audiobw
	touch $@

$(STAMP_TEST): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test]'
	$(BIN)/python -m compileall -q audiobw
	touch $@ $(STAMP_BASE)

demo: $(STAMP_BASE)
	$(BIN)/audiobw demo --out audiobw-out/demo

test: $(STAMP_TEST)
	$(BIN)/python -m pytest

lint: $(STAMP_TEST)
	$(BIN)/ruff check audiobw tests
	$(BIN)/ruff format --check audiobw tests
	$(BIN)/mypy

clips: $(STAMP_BASE)
	$(BIN)/python clips/make_clips.py

bench: $(STAMP_TEST)
	$(BIN)/python benchmarks/run.py

clean:
	rm -rf $(VENV) audiobw-out .pytest_cache

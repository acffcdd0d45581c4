# Two entry points for a fresh machine with only python3: `make demo` and `make test`.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test lint bench docs system clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/cyanorisk demo

test: $(STAMP) system
	$(BIN)/ruff check src tests benchmarks
	$(BIN)/python -m pytest

# System packages some tests need (Chromium, PostgreSQL), through apt-get when missing.
system:
	@.ci/system-packages

# The configuration reference, generated from the settings dataclasses.
docs: $(STAMP)
	$(BIN)/python -m cyanorisk.reference > docs/configuration.md

lint: $(STAMP)
	$(BIN)/ruff check src tests benchmarks

bench: $(STAMP)
	$(BIN)/python benchmarks/bench_ingest.py
	$(BIN)/python benchmarks/bench_features.py
	$(BIN)/python benchmarks/bench_backtest.py
	$(BIN)/python benchmarks/bench_cli.py
	$(BIN)/python benchmarks/bench_faults.py
	$(BIN)/python benchmarks/bench_skill.py
	$(BIN)/python benchmarks/bench_sites.py

clean:
	rm -rf $(VENV) build src/*.egg-info .pytest_cache .ruff_cache

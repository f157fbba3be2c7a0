# Entry points for a fresh machine; each sets itself up.
#   make demo   build the invented demo catalog (db/celllab.sqlite) and open the terminal UI
#   make test   run the whole test suite (installs ngspice from Debian when run as root)
#   make check  ruff, mypy on the core, then the whole test suite (CI runs make test)
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin

.PHONY: demo test lint typecheck check bench clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install -q --upgrade pip

$(VENV)/.installed: $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install -q -e '.[test]'
	touch $@

demo: $(VENV)/.installed
	$(BIN)/celllab demo

ngspice:
	@command -v ngspice >/dev/null 2>&1 || { \
	  if [ "$$(id -u)" = 0 ]; then (apt-get update -qq && apt-get install -y -qq ngspice) >/dev/null; \
	  else echo "ngspice not found: the ngspice reference checks will be skipped (sudo apt-get install ngspice)"; fi; }

test: $(VENV)/.installed ngspice
	$(BIN)/python -m pytest

lint: $(VENV)/.installed
	$(BIN)/python -m ruff check celllab tests

typecheck: $(VENV)/.installed
	$(BIN)/python -m mypy

# the quick checks first, so a lint or type error is reported before the long suite runs
check: lint typecheck test

bench: $(VENV)/.installed
	$(BIN)/python bench/run_all.py

clean:
	rm -rf $(VENV) .mypy_cache db/*.sqlite db/*.sqlite-wal db/*.sqlite-shm

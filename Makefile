# Fresh-machine entry points. Every target creates the virtual environment first.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
DEMO_DIR ?= build/demo
DEMO_DB ?= build/demo.duckdb

.PHONY: setup demo test test-fast bench clean

$(BIN)/breathfleet: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip
	$(BIN)/pip install --quiet -e '.[test]'
	touch $@

setup: $(BIN)/breathfleet

demo: setup
	$(BIN)/breathfleet demo --out $(DEMO_DIR) --db $(DEMO_DB)

test: setup
	$(BIN)/python -m pytest -q

test-fast: setup
	$(BIN)/python -m pytest -q -m "not browser"

bench: setup
	$(BIN)/python -m benchmarks.run

clean:
	rm -rf $(VENV) build bench-output test-artifacts

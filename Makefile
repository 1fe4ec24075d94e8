# Orienteer: `make demo` and `make test` work on a fresh machine with Python 3.11+ and make.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python

.PHONY: demo test lint bench clean

$(VENV)/.base: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install -q --upgrade pip
	$(PY) -m pip install -q -e .
	touch $@

$(VENV)/.test: $(VENV)/.base
	$(PY) -m pip install -q -e '.[test]'
	touch $@

demo: $(VENV)/.base
	$(VENV)/bin/orienteer demo

test: $(VENV)/.test
	$(PY) -m ruff check pipeline tests benchmarks data/demo
	$(PY) -m pytest -q

# every benchmark script, one after the other (each appends its table to benchmarks/RESULTS.md)
bench: $(VENV)/.test
	for script in benchmarks/bench_*.py; do $(PY) $$script || exit 1; done

lint: $(VENV)/.test
	$(PY) -m ruff check pipeline tests benchmarks data/demo

clean:
	rm -rf $(VENV) orienteer-demo .pytest_cache

# lifedraw: `make run` starts the dashboard, `make test` runs the whole suite.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed
TEST_STAMP := $(VENV)/.installed-test

.PHONY: run test bench clean

$(PY):
	$(PYTHON) -m venv $(VENV)

$(STAMP): pyproject.toml | $(PY)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e .
	touch $@

$(TEST_STAMP): pyproject.toml | $(PY)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e ".[test]"
	touch $(STAMP) $@

run: $(STAMP)
	$(VENV)/bin/lifedraw serve --port 5006

test: $(TEST_STAMP)
	$(PY) -m pytest

bench: $(TEST_STAMP)
	$(PY) -m bench.run

clean:
	rm -rf $(VENV) test-artifacts .pytest_cache

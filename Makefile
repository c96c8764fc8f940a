# lifedraw: `make run` starts the dashboard, `make test` runs the whole suite; each sets itself up.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed
TEST_STAMP := $(VENV)/.installed-test
CHROMIUM := /usr/bin/chromium

.PHONY: run test bench browser clean

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

# The browser tests drive Debian's chromium (a browser download is not possible everywhere).
browser:
	@if [ -x $(CHROMIUM) ]; then :; \
	elif [ "$$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then \
		echo "installing Debian's chromium for the browser tests"; \
		DEBIAN_FRONTEND=noninteractive apt-get update -qq && \
		DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium >/dev/null; \
	else \
		echo "The browser tests need Debian's chromium at $(CHROMIUM). Install it with:"; \
		echo "    sudo apt-get install chromium"; \
		exit 1; \
	fi

run: $(STAMP)
	$(VENV)/bin/lifedraw serve

test: $(TEST_STAMP) browser
	$(PY) -m pytest

bench: $(TEST_STAMP) browser
	$(PY) -m bench.run

clean:
	rm -rf $(VENV) test-artifacts .pytest_cache build *.egg-info

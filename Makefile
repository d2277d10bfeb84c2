# Two commands on a fresh machine: `make run` and `make test`.
PYTHON ?= python3
VENV ?= .venv
BIN := $(VENV)/bin
HOST ?= 127.0.0.1
PORT ?= 8000
export HOST PORT

.PHONY: run test lint browsers fuzz spec bench load clean

# Examples per operation and generation mode for `make fuzz`.
FUZZ_EXAMPLES ?= 500

$(BIN)/activate:
	$(PYTHON) -m venv $(VENV)

# Reinstalled whenever pyproject.toml, setup.py or the compiled tails' source change.
$(VENV)/.installed: pyproject.toml setup.py service/sampling/_hypergeometric_tails.c | $(BIN)/activate
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[dev]'
	touch $@

run: $(VENV)/.installed
	$(BIN)/gunicorn --config docker/gunicorn.conf.py service.wsgi:app

lint: $(VENV)/.installed
	$(BIN)/ruff check .
	$(BIN)/mypy
	$(BIN)/bandit -q -c pyproject.toml -r service schemas sampling_client

# Chromium and its driver for the browser tests of the web page: installed when missing
# and make runs as root on Debian; elsewhere one line says how, and only those tests are
# skipped (under CI=true a missing browser fails them instead).
browsers:
	@if command -v chromium >/dev/null 2>&1 && command -v chromedriver >/dev/null 2>&1; then :; \
	elif [ "$$(id -u)" = 0 ] && [ -f /etc/debian_version ] && command -v apt-get >/dev/null 2>&1; then \
	  (apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq \
	    chromium chromium-driver) >/dev/null 2>&1 \
	  || echo "make browsers: apt-get could not install chromium chromium-driver"; \
	else \
	  echo "browser tests skipped: install chromium and chromium-driver (Debian: apt-get install -y chromium chromium-driver)"; \
	fi

# The suite runs in TEST_PROCESSES processes (pytest-xdist), one per core by default; each
# test module stays in one process, so a module's server or browser is started once.
TEST_PROCESSES ?= $(shell nproc 2>/dev/null || echo 2)

test: lint browsers
	$(BIN)/python -m pytest -n $(TEST_PROCESSES) --dist loadscope

fuzz: $(VENV)/.installed
	FUZZ_EXAMPLES=$(FUZZ_EXAMPLES) $(BIN)/python -m pytest -q tests/contract

# Also writes sampling_client/openapi.json, the copy the command reads its flags from.
spec: $(VENV)/.installed
	$(BIN)/python -m service.web.openapi > openapi.yaml

bench: $(VENV)/.installed
	$(BIN)/python bench/bench_sizing.py
	$(BIN)/python bench/bench_selection.py
	$(BIN)/python bench/bench_estimation.py
	$(BIN)/python bench/bench_hypergeometric.py
	$(BIN)/python bench/tail_accuracy.py
	$(BIN)/python bench/monetary_coverage.py
	$(BIN)/python bench/bench_test_sheets.py
	$(BIN)/python bench/bench_plans.py

# Seconds of each wrk run of `make load` (20 runs, then one during which a worker is killed).
LOAD_SECONDS ?= 10

# Not part of `make test`: drives the real server with wrk (apt-get install -y wrk).
load: $(VENV)/.installed
	$(BIN)/python bench/load/run_load.py --seconds $(LOAD_SECONDS)

clean:
	rm -rf $(VENV) .pytest_cache .mypy_cache .ruff_cache .hypothesis .coverage

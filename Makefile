# kinetrace: set-up and everyday commands. Every target bootstraps what it needs and is idempotent.
#   make demo       - generate the sample historian and run the daily check on the demo plant
#   make test       - the whole test suite (doctests included), with its own PostgreSQL server
#   make dashboard  - serve the dashboard on the demo plant's results (http://127.0.0.1:8501/)
#   make bench      - run the benchmarks (they print ratios, they never fail on time)

PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
CONFIG ?= config/demo_plant.toml
PYTEST_ARGS ?=

.PHONY: demo test dashboard bench sysdeps-test clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

# Reinstall only when the project's dependencies change.
$(VENV)/.stamp-run: pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e .
	@touch $@

$(VENV)/.stamp-test: pyproject.toml $(VENV)/.stamp-run
	$(BIN)/python -m pip install --quiet -e '.[test]'
	@touch $@

# System packages the tests need (Debian): PostgreSQL server binaries for the real-server tests,
# Chromium for the browser tests of the dashboard (driven by Playwright; no browser download).
APT_TEST_PKGS := $(if $(wildcard /usr/lib/postgresql/*/bin/initdb),,postgresql) $(if $(wildcard /usr/bin/chromium),,chromium)
sysdeps-test:
	@if [ -n "$(strip $(APT_TEST_PKGS))" ]; then \
	  echo "installing with apt-get: $(strip $(APT_TEST_PKGS))"; \
	  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $(APT_TEST_PKGS) >/dev/null; \
	fi

demo: $(VENV)/.stamp-run
	$(BIN)/kinetrace demo --config $(CONFIG)

dashboard: $(VENV)/.stamp-run
	$(BIN)/kinetrace dashboard --config $(CONFIG)

test: $(VENV)/.stamp-test sysdeps-test
	$(BIN)/python -m pytest $(PYTEST_ARGS)

bench: $(VENV)/.stamp-test
	@for b in benchmarks/bench_*.py; do echo "== $$b"; $(BIN)/python $$b || exit 1; done

clean:
	rm -rf out sample_historian/generated tests/artefacts .pytest_cache

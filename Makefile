# Two entry points for a fresh machine: `make demo` and `make test`.
# Each creates or refreshes the local virtual environment in .venv first.

PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.rimewatch-installed
SUDO   := $(shell [ "$$(id -u)" = 0 ] || echo sudo)

.PHONY: demo test lint bench services clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[dev]'
	touch $(STAMP)

# Test services that the fixtures start themselves (Mosquitto) but need on the PATH.
services:
	@command -v mosquitto >/dev/null 2>&1 || { \
	  echo "installing mosquitto (Debian package)"; \
	  $(SUDO) apt-get update -qq && $(SUDO) DEBIAN_FRONTEND=noninteractive apt-get install -y -qq mosquitto >/dev/null; }

demo: $(STAMP)
	$(BIN)/rimewatch demo

test: $(STAMP) services
	$(BIN)/python -m pytest
	$(BIN)/ruff check .

lint: $(STAMP)
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .

bench: $(STAMP)
	@for b in benchmarks/*.py; do echo "== $$b"; $(BIN)/python $$b || exit 1; done

clean:
	rm -rf $(VENV) rimewatch-demo .pytest_cache .ruff_cache

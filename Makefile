# The two commands of the README, each doing all of its own set-up.
#   make demo   runs the main job on the bundled current-monitor deck
#   make test   runs lint, type checks and the test suite
# Set-up: ngspice and chromium from Debian's packages when missing, a virtual environment in .venv,
# and the package installed into it in editable mode with its test extras.

PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed
SUDO   := $(shell [ "$$(id -u)" = 0 ] || echo sudo)
DEMO   := decks/current-monitor/monitor.cir
OUT    := out

.PHONY: demo test setup ngspice chromium clean bench

demo: setup
	@mkdir -p $(OUT)
	$(BIN)/heatweave run $(DEMO) --json $(OUT)/monitor.json --plot $(OUT)/monitor.png
	@echo "the heatweave command is $(CURDIR)/$(BIN)/heatweave; to call it as heatweave:"
	@echo '  export PATH="$(CURDIR)/$(BIN):$$PATH"'

test: setup
	$(BIN)/ruff check src tests benchmarks
	$(BIN)/mypy
	$(BIN)/pytest

bench: setup
	$(BIN)/python benchmarks/run_all.py

setup: ngspice chromium $(STAMP)

ngspice:
	@if ! command -v ngspice >/dev/null 2>&1 || ! ldconfig -p | grep -q 'libngspice\.so\.0'; then \
	  echo "installing ngspice from Debian's packages"; \
	  $(SUDO) apt-get update -qq && \
	  DEBIAN_FRONTEND=noninteractive $(SUDO) apt-get install -y -qq ngspice libngspice0-dev; \
	fi

# The --html pages are tested in a real browser (tests/test_html_pages.py).
chromium:
	@if ! command -v chromium >/dev/null 2>&1 && ! command -v chromium-browser >/dev/null 2>&1; then \
	  echo "installing chromium from Debian's packages (the HTML page tests render in it)"; \
	  $(SUDO) apt-get update -qq && \
	  DEBIAN_FRONTEND=noninteractive $(SUDO) apt-get install -y -qq chromium; \
	fi

$(STAMP): pyproject.toml
	@$(PYTHON) -m venv $(VENV) 2>/dev/null || { \
	  $(SUDO) apt-get update -qq && \
	  DEBIAN_FRONTEND=noninteractive $(SUDO) apt-get install -y -qq python3-venv && \
	  $(PYTHON) -m venv $(VENV); }
	$(BIN)/pip install -q --upgrade pip
	$(BIN)/pip install -q -e '.[test,dev,plot]'
	@touch $(STAMP)

clean:
	rm -rf $(VENV) $(OUT) .pytest_cache .mypy_cache .ruff_cache

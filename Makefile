# Headcount: everything runs from the project's own virtual environment (.venv).
# Quick start:  make start   (set up, then open the window - or the headless job without a display)
#               make test    (every test)

PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.headcount-installed

.PHONY: setup start headless test lint format bench screenshots clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	@# CPU build of torch: this exact pin takes the local CPU wheel (a looser one pulls a CUDA build).
	$(BIN)/pip install --quiet torch==2.13.0
	$(BIN)/pip install --quiet -e ".[test]"
	touch $(STAMP)

setup: $(STAMP)

# The window when there is a display; otherwise say so and run the headless job.
start: setup
	@if [ -n "$$DISPLAY$$WAYLAND_DISPLAY" ] || [ "$$QT_QPA_PLATFORM" = "offscreen" ] || [ "$$(uname)" = "Darwin" ]; then \
		$(BIN)/headcount; \
	else \
		echo "No display found: running the headless job instead (the window needs a display)."; \
		$(MAKE) --no-print-directory headless; \
	fi

headless: setup
	$(BIN)/python -m inspector.cli.demo

test: setup
	$(BIN)/python -m pytest

lint: setup
	$(BIN)/ruff check inspector ui tests bench docs sample_models
	$(BIN)/ruff format --check inspector ui tests bench docs sample_models

format: setup
	$(BIN)/ruff format inspector ui tests bench docs sample_models

screenshots: setup
	QT_QPA_PLATFORM=offscreen $(BIN)/python docs/make_screenshots.py
	QT_QPA_PLATFORM=offscreen $(BIN)/python docs/make_compare_screenshots.py

bench: setup
	$(BIN)/python -m bench.bench_capture

clean:
	rm -rf $(VENV) .pytest_cache .ruff_cache .hypothesis runs

# Two entry points for a fresh machine: `make demo` and `make test`.
# Both create .venv on first use and install the project with its test extra.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed

.PHONY: demo test lint format bench bench-full screenshot clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test]'
	touch $(STAMP)

# Qt's xcb plugin needs system libraries a fresh Debian lacks: install them (as root) or say
# which packages and the command, in one line, before the window is tried.
demo: $(STAMP)
	$(PY) -m reviewer.gui.platform_check --install
	$(VENV)/bin/margin-reviewer demo

lint: $(STAMP)
	$(VENV)/bin/ruff check .
	$(VENV)/bin/ruff format --check .
	$(VENV)/bin/lint-imports
	$(VENV)/bin/mypy

test: lint
	QT_QPA_PLATFORM=offscreen $(PY) -m pytest -q

format: $(STAMP)
	$(VENV)/bin/ruff format .
	$(VENV)/bin/ruff check --fix .

# Every benchmark's smoke mode (a minute or two); bench-full writes tests/benchmarks/results/.
bench: $(STAMP)
	QT_QPA_PLATFORM=offscreen $(PY) -m tests.benchmarks.run_all

bench-full: $(STAMP)
	QT_QPA_PLATFORM=offscreen $(PY) -m tests.benchmarks.run_all --full

screenshot: $(STAMP)
	QT_QPA_PLATFORM=offscreen $(PY) -m reviewer.gui.screenshot assets/screenshot.png --views assets --text assets/screenshot_text.png

clean:
	rm -rf $(VENV) .pytest_cache .ruff_cache .hypothesis

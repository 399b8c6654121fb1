# hydrodrift: every target creates .venv when missing and installs the project into it.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: install demo test lint bench clean

$(PY):
	$(PYTHON) -c 'import sys; assert sys.version_info >= (3, 11), "hydrodrift needs Python >= 3.11"'
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(PY)
	$(PY) -m pip install --quiet -e '.[test]'
	touch $(STAMP)

install: $(STAMP)

demo: $(STAMP)
	$(VENV)/bin/hydrodrift demo

test: $(STAMP)
	$(VENV)/bin/ruff check .
	$(VENV)/bin/pytest -q

lint: $(STAMP)
	$(VENV)/bin/ruff check .
	$(VENV)/bin/ruff format --check ingest store hydrodrift bench

bench: $(STAMP)
	$(PY) bench/ingest.py
	$(PY) bench/analytics.py

clean:
	rm -rf $(VENV) data .pytest_cache .ruff_cache .hypothesis

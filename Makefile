# Two entry points set everything up on a fresh machine:
#   make demo   - virtual environment, install, build the invented demo market and its report
#   make test   - virtual environment, install (with test extras), run the whole test suite
PYTHON ?= python3
VENV   ?= .venv
PY     := $(VENV)/bin/python

.PHONY: demo test lint bench clean

$(VENV)/.installed: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install -q --upgrade pip
	$(PY) -m pip install -q -e ".[test]"
	touch $@

demo: $(VENV)/.installed
	$(VENV)/bin/afterward demo

test: $(VENV)/.installed
	bash .ci/install-chromium.sh
	$(PY) -m ruff check afterward pipeline warehouse flows tests benchmarks
	$(PY) -m pytest

lint: $(VENV)/.installed
	$(PY) -m ruff check afterward pipeline warehouse flows tests benchmarks

bench: $(VENV)/.installed
	$(PY) benchmarks/run_all.py

clean:
	rm -rf $(VENV) build dist afterward-demo .pytest_cache

# fluxproof — the README's two commands (demo, test) and the benchmarks.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: demo test bench schemas clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[service,test]'
	touch $(STAMP)

demo: $(STAMP)
	$(VENV)/bin/fluxproof demo

test: $(STAMP)
	$(PY) -m pytest

bench: $(STAMP)
	$(PY) -m pytest tests/benchmarks -s -p no:cacheprovider

schemas: $(STAMP)
	$(PY) -m schemas.export

clean:
	rm -rf $(VENV) .pytest_cache build *.egg-info

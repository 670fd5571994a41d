# fluxproof — the README's two commands (demo, test), the fast tests, the linters, the benchmarks.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: demo test check lint bench schemas clean browser

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[service,test]'
	touch $(STAMP)

demo: $(STAMP)
	$(VENV)/bin/fluxproof demo

# The browser tests drive Debian's chromium (never a downloaded build); install it if missing.
SUDO := $(shell [ "$$(id -u)" = 0 ] || echo sudo)
browser:
	@command -v chromium >/dev/null 2>&1 || { $(SUDO) apt-get update && \
		$(SUDO) apt-get install -y chromium; }

# ruff (every file), mypy (the engine and the documents: [tool.mypy] in pyproject.toml) and the
# import-linter layer contracts ([tool.importlinter]: engine < schemas < service < Celery glue).
lint: $(STAMP)
	$(VENV)/bin/ruff check .
	$(VENV)/bin/mypy worker/engine schemas
	$(VENV)/bin/lint-imports

# The fast tests: unit, reference, property and API (no integration, faults, UI, load, fuzz).
check: $(STAMP)
	$(PY) -m pytest tests/unit tests/reference tests/property tests/api -q

test: $(STAMP) browser lint
	$(PY) -m pytest

bench: $(STAMP)
	$(PY) -m pytest tests/benchmarks -s -p no:cacheprovider

schemas: $(STAMP)
	$(PY) -m schemas.export

clean:
	rm -rf $(VENV) .pytest_cache build *.egg-info

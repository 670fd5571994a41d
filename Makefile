# fluxproof — the README's two commands (demo, test) and the benchmarks.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: demo test bench schemas clean browser

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

test: $(STAMP) browser
	$(PY) -m pytest

bench: $(STAMP)
	$(PY) -m pytest tests/benchmarks -s -p no:cacheprovider

schemas: $(STAMP)
	$(PY) -m schemas.export

clean:
	rm -rf $(VENV) .pytest_cache build *.egg-info

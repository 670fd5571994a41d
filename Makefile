# fluxproof — the README's two commands (demo, test), the fast tests, the linters, the benchmarks.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: demo test check lint bench schemas manifest clean browser mutate

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

# ruff (every file), mypy (the engine and the documents: [tool.mypy] in pyproject.toml), the
# import-linter layer contracts ([tool.importlinter]: engine < schemas < service < Celery glue)
# and the release manifest against the files (`make manifest` regenerates it).
lint: $(STAMP)
	$(VENV)/bin/ruff check .
	$(VENV)/bin/mypy worker/engine schemas
	$(VENV)/bin/lint-imports
	$(PY) -m service.qualification.manifest --check

# The fast tests: unit, reference, property and API (no integration, faults, UI, load, fuzz).
check: $(STAMP)
	$(PY) -m pytest tests/unit tests/reference tests/property tests/api -q

test: $(STAMP) browser lint
	$(PY) -m pytest

bench: $(STAMP)
	$(PY) -m pytest tests/benchmarks -s -p no:cacheprovider

schemas: $(STAMP)
	$(PY) -m schemas.export

# The release manifest `fluxproof qualify` checks the installed files against: SHA-256 of every
# file the project installs (service/qualification/manifest.json). Regenerate and commit it after
# changing any of them; `$(PY) -m service.qualification.manifest --check` names what differs.
manifest: $(STAMP)
	$(PY) -m service.qualification.manifest

# Mutation testing (never part of `make test`): mutmut 3 mutates worker/engine and runs, for
# each mutant, the fast tests that reach the mutated function ([tool.mutmut] in pyproject.toml;
# its working copy is mutants/). MUTATE_PATHS narrows the run to some engine modules or folders:
#   make mutate MUTATE_PATHS="worker/engine/limits.py worker/engine/transient/checks.py"
# Every run maps tests to functions afresh (mutants/mutmut-stats.json is removed first: a stale
# map marks mutants "no tests"). Ends with the score of those modules (killed / total) and the
# mutants not killed;
# `.venv/bin/mutmut show NAME` prints one mutant's diff.
MUTATE_PATHS ?= worker/engine
MUTATE_JOBS  ?= 2
MUTATE_NICE  ?= 15
MUTATION_STAMP := $(VENV)/.mutation
empty :=
space := $(empty) $(empty)
MUTANT_PREFIXES := $(foreach p,$(MUTATE_PATHS),$(subst /,.,$(basename $(p:%/=%))).)
MUTANT_GLOBS    := $(addsuffix *,$(MUTANT_PREFIXES))
MUTANT_PATTERN  := ^ *($(subst $(space),|,$(strip $(subst .,\.,$(MUTANT_PREFIXES)))))

$(MUTATION_STAMP): $(STAMP)
	$(PY) -m pip install --quiet -e '.[service,test,mutation]'
	touch $(MUTATION_STAMP)

mutate: $(MUTATION_STAMP)
	@rm -f mutants/mutmut-stats.json
	@start=$$(date +%s); \
	nice -n $(MUTATE_NICE) $(VENV)/bin/mutmut run --max-children $(MUTATE_JOBS) \
		$(foreach g,$(MUTANT_GLOBS),'$(g)') || exit $$?; \
	echo "wall time: $$(( $$(date +%s) - start )) s for $(MUTATE_PATHS)"
	@$(VENV)/bin/mutmut results --all true | grep -E '$(MUTANT_PATTERN)' | awk -F': ' ' \
		{ total++; count[$$2]++; if ($$2 != "killed") left = left "\n  " $$2 ": " $$1 } \
		END { printf "mutants: %d; killed %d, survived %d, timeout %d, other %d\n", \
		      total, count["killed"], count["survived"], count["timeout"], \
		      total - count["killed"] - count["survived"] - count["timeout"]; \
		      printf "score (killed / total): %.1f%%\n", total ? 100 * count["killed"] / total : 0; \
		      if (left != "") printf "not killed:%s\n", left }'

clean:
	rm -rf $(VENV) .pytest_cache build *.egg-info mutants

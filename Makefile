# levelfield: `make demo` and `make test` work on a fresh machine (they create .venv when absent).
PYTHON ?= python3
VENV ?= .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.levelfield-installed
DEMO ?= demo-workspace
LF := $(VENV)/bin/levelfield -w $(DEMO)

.PHONY: demo test setup bench clean fuzz

setup: $(STAMP)

$(STAMP): pyproject.toml
	@$(PYTHON) -c 'import sys; sys.exit("levelfield needs Python 3.11 or newer, found " + sys.version.split()[0]) if sys.version_info < (3, 11) else None'
	@test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --disable-pip-version-check -e '.[test]'
	@touch $(STAMP)

demo: $(STAMP)
	rm -rf $(DEMO)
	$(LF) init
	cp sample_history/levelfield.toml $(DEMO)/levelfield.toml
	$(LF) load sample_history/results/*.csv
	$(LF) plans sample_history/plans.csv
	$(LF) compute
	$(LF) flags --watch
	$(LF) publish
	$(LF) status
	@echo
	@echo "demo workspace: $(abspath $(DEMO))"
	@echo "site:           $(abspath $(DEMO))/public/index.html  (or: $(LF) serve)"

test: $(STAMP)
	$(PY) -m pytest

bench: $(STAMP)
	$(PY) -m bench

clean:
	rm -rf $(DEMO) .pytest_cache

# the long reliability profile: 20x the fuzzing budgets, more kill trials, the 1,000,000-row load
fuzz: $(STAMP)
	LEVELFIELD_FUZZ=long $(PY) -m pytest tests/reliability

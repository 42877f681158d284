# covergrid: every target creates the virtual environment on first use, so on a fresh
# machine `make test` or `make demo` alone does all the set-up.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed
# numba's on-disk cache of the compiled kernel and propagator, warmed after installing and
# again whenever a module that may hold compiled code changes (numba recompiles a function
# whose file changed; when nothing did, warming takes about a second), so no run compiles
WARM   := $(VENV)/.numba-warm
JITTED := $(wildcard coverage/covergrid/compute/*.py coverage/covergrid/orbits/*.py)

.PHONY: venv test test-fast bench demo lint schema clean

venv: $(WARM)

$(STAMP): pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --upgrade --quiet pip
	$(PY) -m pip install --quiet -e '.[dev]'
	touch $(STAMP)

# numba's cache checks only the source file of each compiled function, not the modules whose
# helpers and constants it inlined: when any compiled source changes, start from an empty cache
$(WARM): $(STAMP) $(JITTED)
	find coverage/covergrid/compute coverage/covergrid/orbits -name '*.nb[ic]' -delete
	$(PY) -m covergrid.pipeline.warmup
	touch $(WARM)

# the pytest entry point, not `python -m pytest`: the latter puts the repository root on
# sys.path (see DEVELOPERS.md)
test: $(WARM)
	$(VENV)/bin/pytest -q

test-fast: $(WARM)
	$(VENV)/bin/pytest -q -m 'not slow'

bench: $(WARM)
	$(PY) tests/benchmarks/run_all.py

demo: $(WARM)
	$(VENV)/bin/covergrid run configs/demo.yaml --out outputs

schema: $(STAMP)
	$(VENV)/bin/covergrid schema > configs/schema.json

lint: $(STAMP)
	$(VENV)/bin/ruff check coverage tests
	$(VENV)/bin/mypy

clean:
	rm -rf $(VENV) build *.egg-info coverage/*.egg-info

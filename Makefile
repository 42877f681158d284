# covergrid: every target creates the virtual environment on first use, so on a fresh
# machine `make test` or `make demo` alone does all the set-up.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: venv test test-fast bench demo lint schema clean

venv: $(STAMP)

$(STAMP): pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --upgrade --quiet pip
	$(PY) -m pip install --quiet -e '.[dev]'
	touch $(STAMP)

# the pytest entry point, not `python -m pytest`: the latter puts the repository root on
# sys.path (see DEVELOPERS.md)
test: $(STAMP)
	$(VENV)/bin/pytest -q

test-fast: $(STAMP)
	$(VENV)/bin/pytest -q -m 'not slow'

bench: $(STAMP)
	$(PY) tests/benchmarks/run_all.py

demo: $(STAMP)
	$(VENV)/bin/covergrid run configs/demo.yaml --out outputs

schema: $(STAMP)
	$(VENV)/bin/covergrid schema > configs/schema.json

lint: $(STAMP)
	$(VENV)/bin/ruff check coverage tests
	$(VENV)/bin/mypy

clean:
	rm -rf $(VENV) build *.egg-info coverage/*.egg-info

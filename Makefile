# Two entry points for a fresh machine with Python 3.11: `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
DEMO   := example_db/submissions
DB     := example_db/demo.duckdb
PORT   ?= 8501

.PHONY: demo demo-db test lint typecheck bench clean

# setuptools reports every editable install with a boxed notice (its meta-path finder; nothing to act on here,
# since the top-level folders map onto `milepost.*`): silenced by its message, so the install prints nothing.
PIP    := PYTHONWARNINGS="ignore:Editable installation" $(BIN)/python -m pip

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(VENV)/.installed: pyproject.toml | $(BIN)/python
	$(PIP) install --quiet -e .
	touch $@

$(VENV)/.installed-test: pyproject.toml | $(BIN)/python
	$(PIP) install --quiet -e ".[test]"
	touch $@ $(VENV)/.installed

# The main job on the invented demo intercomparison: check every submission, load them, open the dashboard.
demo: demo-db
	$(BIN)/milepost dashboard --db $(DB) --port $(PORT)

# Reuses a demo database built from the same generator, contract and milepost version; REBUILD=1 builds it anew.
demo-db: $(VENV)/.installed
	$(BIN)/python -m milepost.example_db.demo $(DEMO) --db $(DB) $(if $(REBUILD),--rebuild)

# The whole suite, after the linters (so CI, which runs `make test`, runs them too), on two workers
# (`make test PYTEST_WORKERS=0` runs it in one process).
PYTEST_WORKERS ?= 2
test: lint
	$(BIN)/python -m pytest -q -n $(PYTEST_WORKERS)

lint: $(VENV)/.installed-test
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .
	@$(MAKE) --no-print-directory typecheck

# mypy cannot follow setuptools' editable mapping of the top-level folders onto `milepost.*`, so it reads them
# through a tree of links. tests/ get a second run with looser flags: fixtures need no annotations, and the pandas,
# numpy and openpyxl stubs type `.loc` scalars, optional cells and indicator values as unions that a test narrows
# by asserting on them; what stays checked there is names, attributes, imports and call signatures.
TYPES := .mypy_cache/milepost-tree
MYPY_TESTS := --allow-untyped-defs --allow-incomplete-defs --allow-untyped-calls --allow-any-generics \
	--no-warn-return-any --no-warn-unused-ignores --cache-dir .mypy_cache/tests \
	$(foreach c,union-attr operator comparison-overlap unreachable arg-type call-overload index misc,--disable-error-code $(c))
typecheck: $(VENV)/.installed-test
	@mkdir -p $(TYPES)/milepost
	@for d in schema validate dashboard example_db; do ln -sfn "$(CURDIR)/$$d" "$(TYPES)/milepost/$$d"; done
	$(BIN)/mypy -p milepost.schema -p milepost.validate -p milepost.dashboard -p milepost.example_db
	$(BIN)/mypy $(MYPY_TESTS) tests

bench: $(VENV)/.installed-test
	$(BIN)/python -m milepost.validate.bench $(if $(BENCH_FULL),--full)

clean:
	rm -rf $(VENV) $(DEMO) $(DB) $(DB).inputs .pytest_cache

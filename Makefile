# Two entry points for a fresh machine with Python 3.11: `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
DEMO   := example_db/submissions
DB     := example_db/demo.duckdb
PORT   ?= 8501

.PHONY: demo demo-db test lint bench clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(VENV)/.installed: pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e .
	touch $@

$(VENV)/.installed-test: pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $@ $(VENV)/.installed

# The main job on the invented demo intercomparison: check every submission, load them, open the dashboard.
demo: demo-db
	$(BIN)/milepost dashboard --db $(DB) --port $(PORT)

demo-db: $(VENV)/.installed
	$(BIN)/python -m milepost.example_db.demo $(DEMO) --db $(DB)

test: $(VENV)/.installed-test
	$(BIN)/python -m pytest -q

lint: $(VENV)/.installed-test
	$(BIN)/ruff check .

bench: $(VENV)/.installed-test
	$(BIN)/python -m milepost.validate.bench

clean:
	rm -rf $(VENV) $(DEMO) $(DB) .pytest_cache

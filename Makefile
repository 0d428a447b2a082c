# Two commands do all set-up on a fresh machine: `make demo` and `make test`.
PY      ?= python3
VENV    ?= .venv
BIN     := $(VENV)/bin
STAMP   := $(VENV)/.installed

.PHONY: demo test test-slow bench studies lint clean fuzz

$(BIN)/python:
	$(PY) -m venv $(VENV)

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/capacity demo --out results/demo

test: $(STAMP)
	$(BIN)/python -m pytest -q

test-slow: $(STAMP)
	$(BIN)/python -m pytest -q -m slow

bench: $(STAMP)
	$(BIN)/python benchmarks/run_all.py

fuzz: $(STAMP)
	$(BIN)/python benchmarks/fuzz.py --minutes 10

studies: $(STAMP)
	$(BIN)/python studies/validate_responses.py --particles 1000000
	$(BIN)/python studies/best_symbol_interval.py
	$(BIN)/python studies/schemes_vs_budget.py
	$(BIN)/python studies/layout_sweep.py
	$(BIN)/python studies/validate_near_bead.py
	$(BIN)/python studies/validate_walls.py
	$(BIN)/python studies/validate_flow_walls.py --particles 200000
	$(BIN)/python studies/flow_symbol_interval.py --quick

lint: $(STAMP)
	$(BIN)/ruff check .

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache

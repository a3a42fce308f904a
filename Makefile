# Two commands set up everything on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV   ?= .venv
BIN     = $(VENV)/bin
DEMO_OUT ?= demo_output

.PHONY: demo test lint install bench clean

$(BIN)/activate: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $(BIN)/activate

install: $(BIN)/activate

demo: install
	$(BIN)/peatburn demo --out $(DEMO_OUT) --overwrite

test: install
	$(BIN)/python -m pytest -q

lint: install
	$(BIN)/ruff check peatburn tests benchmarks

bench: install
	$(BIN)/python benchmarks/run_all.py

clean:
	rm -rf $(VENV) $(DEMO_OUT) .pytest_cache

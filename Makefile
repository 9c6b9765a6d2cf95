# Quick start: `make demo` runs the sample case, `make test` runs every check.
# Both create .venv and install what they need when it is absent.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: demo test lint bench clean

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/python samples/run_demo.py

lint: $(STAMP)
	$(BIN)/ruff check importers engine tests benchmarks samples
	$(BIN)/mypy

test: lint
	$(BIN)/python -m pytest; rc=$$?; if [ $$rc -eq 5 ]; then echo "no tests were collected"; exit 1; fi; exit $$rc

bench: $(STAMP)
	$(BIN)/python benchmarks/run_all.py

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache .mypy_cache .ruff_cache demo-output

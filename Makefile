# Two entry points of the quick start: `make demo` and `make test`.
# Both create .venv on first use and install the package into it.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: demo test lint format install clean-demo

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $(STAMP)

install: $(STAMP)

test: $(STAMP)
	$(BIN)/python -m pytest -q

lint: $(STAMP)
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .

format: $(STAMP)
	$(BIN)/ruff check --fix .
	$(BIN)/ruff format .

demo: $(STAMP)
	$(BIN)/python -m scatter_pop.cli.demo runs/demo.toml --out runs/demo_out

clean-demo:
	rm -rf runs/demo_out

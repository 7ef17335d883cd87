# Two commands do all the set-up: `make demo` and `make test`.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test lint bench clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip
	$(BIN)/pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/rebalance plan instances/demo -o out/demo

test: $(STAMP)
	$(BIN)/pytest

lint: $(STAMP)
	$(BIN)/ruff check rebalance tests benchmarks
	$(BIN)/mypy rebalance

clean:
	rm -rf $(VENV) out

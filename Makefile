# Two commands do all the set-up: `make demo` and `make test`.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo demand-demo test lint bench clean browser

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip
	$(BIN)/pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/rebalance plan instances/demo -o out/demo

# Rewrites instances/demo/demand.csv (and demand_trace.csv, demand_report/) from the history.
demand-demo: $(STAMP)
	$(BIN)/rebalance demand instances/demo_history -o instances/demo

# The report's browser test drives Debian's chromium (no browser download at test time).
browser:
	(command -v chromium && command -v chromedriver) >/dev/null || (apt-get update && apt-get install -y chromium chromium-driver)

test: $(STAMP) browser
	$(BIN)/pytest

lint: $(STAMP)
	$(BIN)/ruff check rebalance tests benchmarks notebooks
	$(BIN)/mypy rebalance

# Generates each size, solves it with both backends (one case at a time, two solver threads) and
# rewrites benchmarks/results/<date>.csv and docs/benchmarks.md.  Takes minutes, not seconds.
BENCH_ARGS ?= --sizes small,medium
bench: $(STAMP)
	$(BIN)/python benchmarks/run.py $(BENCH_ARGS)

clean:
	rm -rf $(VENV) out

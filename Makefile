# Two commands take a fresh machine (Python >= 3.11 and make) to a working coderel:
#   make demo   - create .venv, install, run the whole job on the bundled demo project
#   make test   - create .venv if missing, install with test extras, run lint and the whole suite
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed-test
DEMO_OUT := demo-output

.PHONY: demo test lint format bench bench-scale bench-engine venv clean browser

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(VENV)/.installed: pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e .
	touch $@

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $@ $(VENV)/.installed

venv: $(VENV)/.installed

browser:
	bash scripts/ensure-chromium.sh

lint: $(STAMP)
	$(BIN)/ruff check coderel tests benchmarks scripts
	$(BIN)/ruff format --check coderel tests benchmarks scripts

format: $(STAMP)
	$(BIN)/ruff format coderel tests benchmarks scripts
	$(BIN)/ruff check --fix coderel tests benchmarks scripts

test: $(STAMP) browser lint
	$(BIN)/python -m pytest -q

bench: $(STAMP)
	$(BIN)/python benchmarks/bench_agree.py

# Crowd-scale data sets (issue 14): wall time and peak memory of whole commands.
# Pick with SETS=a,d COMMANDS=validate,agree (defaults: every set and command).
SETS ?= a,b,c,d,r,j
COMMANDS ?= validate,agree,merge,report
bench-scale: $(STAMP)
	$(BIN)/python benchmarks/bench_scale.py --sets $(SETS) --commands $(COMMANDS)

# agree, merge and report with --engine dask (a local cluster of 2 worker processes) against the
# default engine on a dataset partitioned by unit: LABELS=1M,5M ENGINE_COMMANDS=agree,merge.
LABELS ?= 1M
ENGINE_COMMANDS ?= agree,merge,report
bench-engine: $(STAMP)
	$(BIN)/python benchmarks/bench_engine.py --labels $(LABELS) --commands $(ENGINE_COMMANDS)

demo: $(VENV)/.installed
	bash scripts/demo.sh $(BIN)/coderel $(DEMO_OUT)

clean:
	rm -rf $(VENV) $(DEMO_OUT) test-output .pytest_cache .ruff_cache .hypothesis

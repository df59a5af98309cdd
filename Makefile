# Two commands do all the setup on a fresh clone: `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed-test

.PHONY: demo test check bench lint format clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml setup.py checker/dsp/kernels.c checker/dsp/native.py | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test]'
	$(BIN)/python -m compileall -q checker
	touch $(STAMP)

# compileall: an editable install runs from the source tree; where PYTHONDONTWRITEBYTECODE is
# set, every command would otherwise compile the whole package again (about 0.4 s per start).
demo: $(STAMP)
	$(BIN)/python -m compileall -q checker
	$(BIN)/python demo/run_demo.py

test: $(STAMP)
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .
	$(BIN)/python -m pytest -q

# Daily work: lint plus the unit, conformance and hardening tiers (no end-to-end runs, no browser).
check: $(STAMP)
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .
	$(BIN)/python -m pytest -q tests/unit tests/conformance tests/hardening

bench: $(STAMP)
	$(BIN)/python tests/benchmarks/run_bench.py

format: $(STAMP)
	$(BIN)/ruff check --fix .
	$(BIN)/ruff format .

clean:
	rm -rf $(VENV) build *.egg-info demo/out

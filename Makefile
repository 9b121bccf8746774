# Two commands do all set-up on a machine that has only Python:
#   make demo   – create .venv, install, run the main job on the built-in default
#   make test   – create .venv if needed, install, run the test suite
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed
export OPENBLAS_NUM_THREADS ?= 1
export MPLBACKEND ?= Agg

.PHONY: demo test test-all bench install clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test]'
	if [ -d examples/lyapbench_plugin_example ]; then $(BIN)/python -m pip install --quiet -e examples/lyapbench_plugin_example; fi
	touch $(STAMP)

install: $(STAMP)

demo: $(STAMP)
	$(BIN)/lyapbench demo

test: $(STAMP)
	$(BIN)/python -m pytest -q

test-all: $(STAMP)
	$(BIN)/python -m pytest -q -m ''

bench: $(STAMP)
	$(BIN)/python benchmarks/run_all.py $(if $(QUICK),--quick)

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache

# Two commands a newcomer needs: `make test` and `make lab`. Both create .venv if missing.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: test test-fast lab demo bench clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

test: $(STAMP)
	$(BIN)/python -m pytest
	$(BIN)/python -m mypy src/tiltwell

# The quick loop while editing (about a minute): everything but the tests marked slow.
test-fast: $(STAMP)
	$(BIN)/python -m pytest -m "not slow"

bench: $(STAMP)
	$(BIN)/python benchmarks/run.py

# JupyterLab refuses to start as root unless told; containers often run as root.
ROOT_FLAG := $(if $(filter 0,$(shell id -u)),--allow-root,)

lab: $(STAMP)
	$(BIN)/jupyter lab $(ROOT_FLAG) notebooks/01-quickstart.ipynb

demo: $(STAMP)
	$(BIN)/tiltwell demo --out demo
	$(BIN)/tiltwell figures demo/demo.toml --out demo/figures

clean:
	rm -rf $(VENV) build src/*.egg-info .pytest_cache .mypy_cache

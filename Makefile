# Two commands a newcomer needs: `make test` and `make lab`. Both create .venv if missing.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: test lab demo bench clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

test: $(STAMP)
	$(BIN)/python -m pytest
	$(BIN)/python -m mypy src/tiltwell

bench: $(STAMP)
	$(BIN)/python benchmarks/run.py

lab: $(STAMP)
	@echo "The notebook explorer arrives with the explorer issue; for now: $(BIN)/python -i -c 'import tiltwell'"

demo: $(STAMP)
	@echo "The demo figures arrive with the explorer issue."

clean:
	rm -rf $(VENV) build src/*.egg-info .pytest_cache .mypy_cache

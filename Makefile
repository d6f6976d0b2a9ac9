# The two commands of the README.  Each makes .venv when it is missing.
PY      ?= python3
VENV    := .venv
BIN     := $(VENV)/bin
STAMP_T := $(VENV)/.installed-test
STAMP_D := $(VENV)/.installed-demo

.PHONY: test demo bench lint clean

$(BIN)/python:
	$(PY) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP_T): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e ".[test,distributed,render]"
	touch $@

$(STAMP_D): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e ".[test,render]"
	touch $@

test: $(STAMP_T)
	$(BIN)/ruff check floorwidget tests benchmarks
	$(BIN)/python -m pytest -q

# JupyterLab refuses to start as root unless told; containers and CI machines often are root.
ROOT_FLAG := $(if $(filter 0,$(shell id -u)),--allow-root,)

demo: $(STAMP_D)
	$(BIN)/jupyter lab $(ROOT_FLAG) notebooks/01-quickstart.ipynb

bench: $(STAMP_T)
	$(BIN)/python benchmarks/run.py

lint: $(STAMP_T)
	$(BIN)/ruff check floorwidget tests benchmarks

clean:
	rm -rf $(VENV) .pytest_cache build *.egg-info

# Two commands on a fresh machine with only python3 and make:
#   make run   - create .venv, install, open the GUI on the demo project
#   make test  - create .venv, install with the test extra, run the whole suite offscreen
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
DEMO := sample_images/demo.spherokin.json

.PHONY: run test install install-test benchmarks clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --upgrade pip

$(VENV)/.installed: pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install -e .
	touch $@

$(VENV)/.installed-test: pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install -e ".[test]"
	touch $(VENV)/.installed $@

install: $(VENV)/.installed
install-test: $(VENV)/.installed-test

run: $(VENV)/.installed
	@$(BIN)/spherokin gui $(DEMO)

test: $(VENV)/.installed-test
	QT_QPA_PLATFORM=offscreen $(BIN)/python -m pytest

benchmarks: $(VENV)/.installed-test
	$(BIN)/python tests/benchmarks/accuracy.py
	$(BIN)/python tests/benchmarks/speed.py

clean:
	rm -rf $(VENV) build *.egg-info

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
	$(BIN)/python -m pip install --quiet --upgrade pip

$(VENV)/.installed: pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e .
	touch $@

$(VENV)/.installed-test: pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $(VENV)/.installed $@

install: $(VENV)/.installed
install-test: $(VENV)/.installed-test

# Exit status 2 (no display, or a bad file) has already been explained in one line by
# spherokin itself; make need not add its own error line on top.
run: $(VENV)/.installed
	@$(BIN)/spherokin gui $(DEMO); status=$$?; [ $$status -eq 0 ] || [ $$status -eq 2 ] || exit $$status

test: $(VENV)/.installed-test
	QT_QPA_PLATFORM=offscreen $(BIN)/python -m pytest

benchmarks: $(VENV)/.installed-test
	$(BIN)/python tests/benchmarks/accuracy.py
	$(BIN)/python tests/benchmarks/speed.py
	QT_QPA_PLATFORM=offscreen $(BIN)/python tests/benchmarks/gui_scrub.py
	$(BIN)/python tests/benchmarks/open_large_stack.py

clean:
	rm -rf $(VENV) build *.egg-info

# Two commands for a fresh machine: `make demo` and `make test`. Both set everything up first.
PYTHON ?= python3
VENV   ?= .venv
BIN     = $(VENV)/bin
STAMP   = $(VENV)/.installed

.PHONY: install demo test test-fast clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip
	# The CPU build of torch first: a bare `torch` requirement would pull a multi-GB CUDA build.
	$(BIN)/pip install --quiet torch==2.13.0
	$(BIN)/pip install --quiet -e '.[test]'
	touch $(STAMP)

install: $(STAMP)

demo: $(STAMP)
	$(BIN)/python studies/run_demo.py

test: $(STAMP)
	$(BIN)/python -m pytest -q -p no:cacheprovider

test-fast: $(STAMP)
	$(BIN)/python -m pytest -q -m "not slow"

clean:
	rm -rf $(VENV) studies/*.csv studies/*.db* studies/*.zip studies/*.html

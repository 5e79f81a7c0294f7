# Two commands for a fresh machine: `make demo` and `make test`. Both set everything up first.
PYTHON ?= python3
VENV   ?= .venv
BIN     = $(VENV)/bin
STAMP   = $(VENV)/.installed

.PHONY: install demo lint test test-fast clean

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

# ruff and mypy (configured in pyproject.toml) run before the tests: a lint failure fails `make test`.
lint: $(STAMP)
	$(BIN)/ruff check tunelab tests benchmarks studies
	$(BIN)/mypy

# Two pytest workers, one test file each at a time: the tests run trials on one core (TUNELAB_JOBS=1),
# so a second worker uses the machine's second core instead of leaving it idle.
test: lint
	$(BIN)/python -m pytest -q -p no:cacheprovider -n 2 --dist loadfile

test-fast: lint
	$(BIN)/python -m pytest -q -m "not slow"

clean:
	rm -rf $(VENV) .mypy_cache .ruff_cache studies/*.csv studies/*.db* studies/*.zip studies/*.html

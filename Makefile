# Two commands matter: `make demo` and `make test`. Both set up .venv on first use.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: demo test lint typecheck bench samples clean

$(STAMP): pyproject.toml
	@$(PYTHON) -c 'import sys; sys.exit(0 if sys.version_info >= (3, 10) else "evtkin needs Python >= 3.10")'
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e ".[test]"
	touch $(STAMP)

test: $(STAMP)
	$(VENV)/bin/ruff check src tests bench
	$(VENV)/bin/pytest

lint: $(STAMP)
	$(VENV)/bin/ruff check src tests bench
	$(VENV)/bin/mypy

typecheck: lint

demo: $(STAMP)
	bash scripts/demo.sh

bench: $(STAMP)
	$(PY) bench/run_all.py

clean:
	rm -rf $(VENV) build dist .pytest_cache .ruff_cache .mypy_cache demo-output

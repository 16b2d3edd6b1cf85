# Two commands matter: `make demo` and `make test`. Both set up .venv on first use.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed
# pytest processes for `make test` (pytest-xdist): one per core by default; TEST_WORKERS=0 runs in one process
TEST_WORKERS ?= auto

.PHONY: demo test lint bench samples clean

$(STAMP): pyproject.toml
	@$(PYTHON) -c 'import sys; sys.exit(0 if sys.version_info >= (3, 10) else "evtkin needs Python >= 3.10")'
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e ".[test]"
	touch $(STAMP)

test: $(STAMP)
	$(VENV)/bin/ruff check src tests bench
	$(VENV)/bin/mypy
	@# compile the numba kernels once, into their cache, before the test processes start (else each compiles them)
	$(PY) -c "import evtkin.run._warmup"
	$(VENV)/bin/pytest -n $(TEST_WORKERS)

lint: $(STAMP)
	$(VENV)/bin/ruff check src tests bench
	$(VENV)/bin/mypy

demo: $(STAMP)
	bash scripts/demo.sh

bench: $(STAMP)
	$(PY) bench/make_big_lhe.py --gzip
	$(PY) bench/bench_lhe.py
	$(PY) bench/bench_fill.py
	$(PY) bench/bench_ntuple.py

# the shipped toy samples (see samples/README.md for what they are)
samples: $(STAMP)
	$(VENV)/bin/evtkin toy ttbar    -n 5000  --seed 1301 --precision 10 -o samples/toy_ttbar.lhe.gz
	$(VENV)/bin/evtkin toy deformed -n 5000  --seed 1302 --precision 10 --deform-lambda 1000 -o samples/toy_ttbar_deformed.lhe.gz
	$(VENV)/bin/evtkin toy drellyan -n 8000  --seed 1303 --precision 10 -o samples/toy_drellyan.lhe.gz
	$(VENV)/bin/evtkin toy ntuple   -n 20000 --seed 1304 -o samples/toy_ttbar_reco.root
	$(VENV)/bin/evtkin toy shower samples/toy_ttbar.lhe.gz    -n 250 --seed 1501 -o samples/toy_ttbar_shower.hepmc.gz
	$(VENV)/bin/evtkin toy shower samples/toy_drellyan.lhe.gz -n 100 --seed 1502 -o samples/toy_drellyan_shower.hepmc.gz

clean:
	rm -rf $(VENV) build dist .pytest_cache .ruff_cache .mypy_cache demo-output

# The two commands of the README: `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
# Tool caches stay inside the checkout, never in $HOME.
export NUMBA_CACHE_DIR ?= $(CURDIR)/.cache/numba
export MPLCONFIGDIR    ?= $(CURDIR)/.cache/matplotlib

.PHONY: demo test bench bench-quick clean

$(BIN)/.installed: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip
	$(BIN)/pip install --quiet -e '.[test]'
	touch $@

demo: $(BIN)/.installed          ## install, start the service, post the demo, keep serving
	$(BIN)/cycleledger demo

test: $(BIN)/.installed          ## install, then run the whole test suite
	$(BIN)/python -m pytest -q -p no:cacheprovider --basetemp=.cache/pytest

bench-quick: $(BIN)/.installed   ## the benchmarks' short runs
	$(BIN)/python tests/benchmarks/bench_counting.py --quick
	$(BIN)/python tests/benchmarks/bench_assessment.py --quick
	$(BIN)/python tests/benchmarks/bench_api.py --quick
	$(BIN)/python tests/benchmarks/bench_ledger.py --quick
	$(BIN)/python tests/benchmarks/bench_load.py --quick
	$(BIN)/python tests/benchmarks/bench_multiaxial.py --quick
	$(BIN)/python tests/benchmarks/bench_scale.py --quick
	$(BIN)/python tests/benchmarks/bench_inputs.py --quick
	$(BIN)/python tests/benchmarks/bench_reports.py --quick
	$(BIN)/python tests/benchmarks/bench_strain_life.py --quick
	$(BIN)/python tests/benchmarks/bench_editing.py --quick
	$(BIN)/python tests/benchmarks/bench_spectral.py --quick

bench: $(BIN)/.installed         ## the benchmarks' full runs (several minutes)
	$(BIN)/python tests/benchmarks/bench_counting.py
	$(BIN)/python tests/benchmarks/bench_assessment.py
	$(BIN)/python tests/benchmarks/bench_api.py
	$(BIN)/python tests/benchmarks/bench_ledger.py
	$(BIN)/python tests/benchmarks/bench_load.py
	$(BIN)/python tests/benchmarks/bench_multiaxial.py
	$(BIN)/python tests/benchmarks/bench_scale.py
	$(BIN)/python tests/benchmarks/bench_inputs.py
	$(BIN)/python tests/benchmarks/bench_reports.py
	$(BIN)/python tests/benchmarks/bench_strain_life.py
	$(BIN)/python tests/benchmarks/bench_editing.py
	$(BIN)/python tests/benchmarks/bench_spectral.py

clean:
	rm -rf $(VENV) .cache examples/data cycleledger-data cycleledger-demo dist build

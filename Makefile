# speciakin: two commands for a newcomer, `make demo` and `make test`.
PYTHON ?= python3.11
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed
# compiled kernels go to the per-user cache the package chooses (simulation/cache_guard.py), the same
# for make, the speciakin command and Python; set NUMBA_CACHE_DIR to choose another folder
export MPLBACKEND ?= Agg

.PHONY: demo test test-slow bench example-report install clean

$(PY):
	@command -v $(PYTHON) >/dev/null 2>&1 || { echo "error: $(PYTHON) not found; install Python 3.11 or run 'make PYTHON=python3 ...'"; exit 2; }
	$(PYTHON) -m venv $(VENV)

$(STAMP): pyproject.toml | $(PY)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e ".[dev,web]"
	@touch $(STAMP)

install: $(STAMP)

demo:
	@start=$$(date +%s); \
	$(MAKE) --no-print-directory install && \
	$(VENV)/bin/speciakin demo && \
	echo "make demo: $$(( $$(date +%s) - start )) s in all, install included"

test: $(STAMP)
	$(PY) -m pytest -q -m "not slow"

test-slow: $(STAMP)
	$(PY) -m pytest -q -m slow

bench: $(STAMP)
	$(PY) benchmarks/run_all.py

example-report: $(STAMP)
	rm -rf reports/example
	$(VENV)/bin/speciakin demo --out reports/example --seed 20261201 --steps 2000 --quiet

clean:
	rm -rf $(VENV) .pytest_cache .hypothesis .numba_cache reports/demo

# Quick start: `make demo` and `make test` each set up .venv on first use.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.stamp-base
TEST_STAMP := $(VENV)/.stamp-test

.PHONY: demo test setup bench perf clean

setup: $(STAMP)

# torch goes in first, pinned, so that the CPU wheel on this machine is used instead of
# a multi-GB GPU build pulled in by stable-baselines3.
$(STAMP): pyproject.toml
	test -d $(VENV) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet torch==2.13.0
	$(PY) -m pip install --quiet -e ".[dev]"
	touch $(STAMP)

# The test suite also needs the optional cluster backend (ray).
$(TEST_STAMP): $(STAMP)
	$(PY) -m pip install --quiet -e ".[dev,cluster]"
	touch $(TEST_STAMP)

# The main job on the built-in default: the `quick` suite (invented instances), table + report.
demo: $(STAMP)
	$(PY) -m invbench bench quick --out runs/quick

# Reruns the classic lost-sales suite (classical policies and optimum) from scratch and
# compares it cell by cell with the committed reference results.
bench: $(STAMP)
	rm -rf runs/bench-classic-lost-sales
	$(PY) -m invbench bench classic-lost-sales --skip-agents --out runs/bench-classic-lost-sales --no-report
	$(PY) -m invbench bench-compare runs/bench-classic-lost-sales experiments/reference/classic-lost-sales.csv

test: $(TEST_STAMP)
	$(PY) -m pytest -n 2 -q

perf: $(STAMP)
	$(PY) experiments/perf/dp_grid.py
	$(PY) experiments/perf/sim_throughput.py
	$(PY) experiments/perf/scaling.py

clean:
	rm -rf $(VENV) build *.egg-info

# Quick start: `make demo` and `make test` each set up .venv on first use.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.stamp-base
TEST_STAMP := $(VENV)/.stamp-test

.PHONY: demo test setup bench perf clean chromium

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

# The report test renders the HTML report in headless Chromium. When it is missing, install
# Debian's package if this user can (root, apt-get there); otherwise stop with one line.
chromium_path = $(shell command -v chromium 2>/dev/null || command -v chromium-browser 2>/dev/null)
can_install = $(and $(filter 0,$(shell id -u 2>/dev/null)),$(shell command -v apt-get 2>/dev/null))
NO_CHROMIUM = make test needs headless Chromium for the report test: install it with your package manager (Debian: sudo apt-get install -y chromium) and run make test again

chromium:
	$(if $(chromium_path),@:,$(if $(can_install),@echo "make test: installing chromium (apt-get) for the report test"; apt-get update -qq >/dev/null 2>&1 && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium >/dev/null 2>&1 || { echo "make test: apt-get could not install chromium; $(NO_CHROMIUM)" >&2; exit 1; },$(error $(NO_CHROMIUM))))

test: chromium $(TEST_STAMP)
	$(PY) -m pytest -n 2 -q

perf: $(STAMP)
	$(PY) experiments/perf/dp_grid.py
	$(PY) experiments/perf/sim_throughput.py
	$(PY) experiments/perf/env_step.py
	$(PY) experiments/perf/scaling.py

clean:
	rm -rf $(VENV) build *.egg-info

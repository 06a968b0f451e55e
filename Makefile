# Quick start: `make demo` and `make test` each set up .venv on first use.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed-stamp

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

demo: $(STAMP)
	$(PY) -m invbench demo

test: $(STAMP)
	$(PY) -m pytest -n 2 -q

clean:
	rm -rf $(VENV) build *.egg-info

# make demo : set up .venv (if needed) and run the main job on the shipped demo target, then the
#             calibration loop on the invented hidden device (measured data -> calibrated model
#             -> planning answers)
# make test : set up .venv (if needed) and run the test suite (all of it: what CI runs)
# make test-fast : the everyday loop: every test that does not sample with sinter (-m "not slow")
# make cluster-check : (root, Debian) a real single-node Slurm, the README's dask-jobqueue recipe
#                      on it, totals checked with sinter; not part of make test
# The distribution is named qec-budget-planner ("planner" on the package index is an unrelated
# project); the command and the import package are both planner.
PY ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test test-fast install bench cluster-check clean

$(BIN)/python:
	$(PY) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(BIN)/python
	@# a .venv made before the rename holds the old distribution "planner": remove it
	$(BIN)/python -m pip uninstall --quiet --yes planner 2>/dev/null || true
	rm -rf planner.egg-info
	$(BIN)/python -m pip install --quiet -e '.[test,cluster]'
	touch $(STAMP)

install: $(STAMP)

demo: $(STAMP)
	$(BIN)/planner run targets/demo.toml --budget quick
	bash scripts/demo_loop.sh $(BIN)/planner

test: $(STAMP)
	$(BIN)/python -m pytest -q

test-fast: $(STAMP)
	$(BIN)/python -m pytest -q -m "not slow"

bench: $(STAMP)
	$(BIN)/python bench/throughput.py

cluster-check: $(STAMP)
	bash scripts/cluster_check.sh

clean:
	rm -rf out/demo .pytest_cache

# make demo : set up .venv (if needed) and run the main job on the shipped demo target
# make test : set up .venv (if needed) and run the test suite
PY ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test install bench clean

$(BIN)/python:
	$(PY) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test,cluster]'
	touch $(STAMP)

install: $(STAMP)

demo: $(STAMP)
	$(BIN)/planner run targets/demo.toml --budget quick

test: $(STAMP)
	$(BIN)/python -m pytest -q

bench: $(STAMP)
	$(BIN)/python bench/throughput.py

clean:
	rm -rf out/demo .pytest_cache

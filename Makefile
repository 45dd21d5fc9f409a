# One virtual environment (.venv) serves every target; each target creates or reuses it.
PY ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test check bench clean venv

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PY) -m venv $(VENV)
	$(BIN)/python -m pip install -q --upgrade pip
	$(BIN)/python -m pip install -q -e '.[test]'
	touch $(STAMP)

venv: $(STAMP)

demo: $(STAMP)
	$(BIN)/frontwatch demo

test: $(STAMP)
	$(BIN)/python -m pytest -q

check: $(STAMP)
	$(BIN)/ruff check frontwatch tests bench tools
	$(BIN)/mypy

bench: $(STAMP)
	$(BIN)/python bench/run_all.py

clean:
	rm -rf $(VENV) build *.egg-info

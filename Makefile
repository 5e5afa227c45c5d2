# airtaper: `make demo` and `make test` each create .venv when missing and install what they need.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: demo test bench check-layouts clean

$(PY):
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(PY)
	$(PY) -m pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(VENV)/bin/airtaper check layouts/demo.toml
	$(VENV)/bin/airtaper optimize layouts/demo.toml --out outputs/demo --overwrite

test: $(STAMP)
	$(PY) -m pytest -q

bench: $(STAMP)
	$(PY) benchmarks/run_all.py

clean:
	rm -rf $(VENV) build src/*.egg-info .pytest_cache

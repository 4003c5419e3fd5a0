# Two commands for a newcomer: `make demo` and `make test`. Both set up .venv on first use.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed

.PHONY: demo test clean

$(STAMP): pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test,sklearn,plot]'
	touch $(STAMP)

demo: $(STAMP)
	$(PY) examples/make_flake_data.py --output examples/data/flakes.csv
	$(PY) examples/audit_flakes.py examples/data/flakes.csv

test: $(STAMP)
	$(PY) -m pytest -q

clean:
	rm -rf $(VENV) build dist *.egg-info .pytest_cache

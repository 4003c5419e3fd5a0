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
	$(PY) examples/write_report.py examples/data/flakes.csv examples/output/flakes_report.html

test: $(STAMP)
	$(PY) -m pytest -q

clean:
	rm -rf $(VENV) build dist *.egg-info .pytest_cache

.PHONY: validate

# The validation study of the recommendation (benchmarks/validation/README.md); not part of `make test`.
validate: $(STAMP)
	$(PY) benchmarks/validation/study.py

.PHONY: bench

# Speed and memory of the audit against its peers (benchmarks/README.md); writes benchmarks/RESULTS.md.
# Not part of `make test`. The MCD-only benchmark is `$(PY) benchmarks/bench_mcd.py`.
bench: $(STAMP)
	$(PY) benchmarks/bench_preflight.py

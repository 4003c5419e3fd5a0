# Two commands for a newcomer: `make demo` and `make test`. Both set up .venv on first use.
# `make check` (lint, types, tests) and `make package` (build, install the wheel elsewhere, run it)
# are what CI runs (.ci/run).
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed
# The demo needs discaudit and matplotlib only (the report's figures): its own, lighter stamp.
DEMO_STAMP := $(VENV)/.demo-installed
PKG_TMP := $(shell mktemp -u /tmp/discaudit-package.XXXXXX)

.PHONY: demo test lint types check package validate bench clean

$(STAMP): pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test,sklearn,plot,dev]'
	touch $(STAMP)

$(DEMO_STAMP): pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[plot]'
	touch $(DEMO_STAMP)

demo: $(DEMO_STAMP)
	$(PY) examples/make_flake_data.py --output examples/data/flakes.csv
	$(PY) examples/audit_flakes.py examples/data/flakes.csv
	$(PY) examples/write_report.py examples/data/flakes.csv examples/output/flakes_report.html

test: $(STAMP)
	$(PY) -m pytest -q

lint: $(STAMP)
	$(VENV)/bin/ruff check .
	$(VENV)/bin/ruff format --check .

types: $(STAMP)
	$(VENV)/bin/mypy

check: lint types test

# Build the sdist and wheel, install the wheel into a fresh venv outside the source tree, and gate
# the demo CSV there: a missing package-data file or an undeclared dependency fails here.
package: $(STAMP)
	rm -rf dist
	$(PY) -m build --quiet --outdir dist .
	mkdir -p $(PKG_TMP)
	$(PYTHON) -m venv $(PKG_TMP)/venv
	$(PKG_TMP)/venv/bin/python -m pip install --quiet dist/*.whl
	$(PY) examples/make_flake_data.py --output $(PKG_TMP)/flakes.csv
	cd $(PKG_TMP) && venv/bin/python -c "import discaudit, pathlib; \
		assert (pathlib.Path(discaudit.__file__).parent / 'py.typed').exists(), 'py.typed missing from the wheel'"
	cd $(PKG_TMP) && { venv/bin/discaudit check flakes.csv --target family --index-col flake_id \
		--format json --output report.json; status=$$?; test $$status -le 1; } && test -s $(PKG_TMP)/report.json
	rm -rf $(PKG_TMP)
	@echo "package check passed: wheel installs and runs outside the source tree"

# The validation study of the recommendation (benchmarks/validation/README.md); not part of `make test`.
validate: $(STAMP)
	$(PY) benchmarks/validation/study.py

# Speed and memory of the audit against its peers (benchmarks/README.md); writes benchmarks/RESULTS.md.
# Not part of `make test`. The MCD-only benchmark is `$(PY) benchmarks/bench_mcd.py`. bench_engines.py: a
# 20-million-row Parquet file through DuckDB, pyarrow and the pandas-batch chunked path, and a local Spark run.
bench: $(STAMP)
	$(PY) benchmarks/bench_preflight.py
	$(PY) benchmarks/bench_engines.py
	$(PY) benchmarks/bench_what_if.py

clean:
	rm -rf $(VENV) build dist *.egg-info .pytest_cache

# Quick start targets: each creates its own virtual environment in .venv on first use.
PYTHON ?= python3
VENV ?= .venv
PY := $(VENV)/bin/python

.PHONY: demo test bench bytecode clean-venv

$(VENV)/.installed: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e ".[test]"
	touch $@

# Byte-compile the package once (an editable install is not compiled by pip, and with
# PYTHONDONTWRITEBYTECODE set every command would compile ~0.15 s of source again);
# compileall only rewrites files whose source changed.
bytecode: $(VENV)/.installed
	$(PY) -m compileall -q tfhrv

demo: bytecode
	$(VENV)/bin/tfhrv inspect demo_data/sw01_day_worker.csv.gz
	$(VENV)/bin/tfhrv demo

test: $(VENV)/.installed
	$(PY) -m pytest -q

bench: bytecode
	for f in benchmarks/bench_*.py; do $(PY) $$f || exit 1; done

clean-venv:
	rm -rf $(VENV)

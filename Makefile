# Two entry points for a fresh machine: `make lab` and `make test`.
# Each creates .venv on first use and installs what it needs.
PYTHON ?= python3
VENV   ?= .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: lab test bench clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install -q --upgrade pip
	$(PY) -m pip install -q -e '.[ui,test,fast,cluster]'
	touch $(STAMP)

lab: $(STAMP)
	$(PY) -m workbench.launch

test: $(STAMP)
	$(PY) -m ruff check workbench tests benchmarks data
	$(PY) -m pytest --nbval-lax --nbval-current-env --nbval-sanitize-with notebooks/sanitize.cfg -p no:cacheprovider

bench: $(STAMP)
	$(PY) benchmarks/run.py --quick

clean:
	rm -rf $(VENV) artifacts

# foldline: every target creates .venv and installs the project when needed.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed

.PHONY: demo test bench lab clean install

$(STAMP): pyproject.toml
	test -d $(VENV) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e ".[notebook,batch,test,formats]"
	touch $(STAMP)

install: $(STAMP)

demo: $(STAMP)
	$(VENV)/bin/foldline demo --out out/demo --force

test: $(STAMP)
	$(PY) -m pytest -q -n auto --dist loadgroup

bench: $(STAMP)
	$(PY) bench/run_all.py

lab: $(STAMP)
	$(VENV)/bin/jupyter lab notebooks/

clean:
	rm -rf $(VENV) out .pytest_cache .hypothesis .benchmarks

# Every target builds its own virtual environment, so a fresh clone needs nothing else.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
OUT    ?= demo-output

.PHONY: demo test bench lint clean

$(VENV)/.installed-all: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[all]'
	touch $@

$(VENV)/.installed-test: pyproject.toml $(VENV)/.installed-all
	$(PY) -m pip install --quiet -e '.[all,test]'
	touch $@

demo: $(VENV)/.installed-all
	$(VENV)/bin/forecastaudit demo --out $(OUT)

test: $(VENV)/.installed-test
	$(PY) -m ruff check .
	$(PY) -m pytest

bench: $(VENV)/.installed-test
	$(PY) benchmarks/run_all.py

lint: $(VENV)/.installed-test
	$(PY) -m ruff check .
	$(PY) -m ruff format --check .

clean:
	rm -rf $(VENV) $(OUT) build *.egg-info

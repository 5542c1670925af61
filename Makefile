# Two commands a new engineer needs: `make run` and `make test`.
# Both create (or reuse) the virtual environment in .venv and install what they need.

VENV   ?= .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed-stamp
HOST   ?= 127.0.0.1
PORT   ?= 8000

.PHONY: run test lint bench bench-load clean-venv

$(STAMP): pyproject.toml
	python3 -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[dev]'
	touch $(STAMP)

run: $(STAMP)
	$(VENV)/bin/foldwise serve --host $(HOST) --port $(PORT)

lint: $(STAMP)
	$(VENV)/bin/ruff check service tests bench
	$(VENV)/bin/ruff format --check service tests bench
	$(VENV)/bin/mypy

test: lint
	bash scripts/system-packages
	$(PY) -m pytest

bench: $(STAMP)
	$(PY) bench/fold_engine.py
	$(PY) bench/fold_http.py
	$(PY) bench/diagnose.py
	$(PY) bench/plan.py
	$(PY) bench/audit.py

bench-load: $(STAMP)
	$(PY) bench/load.py

clean-venv:
	rm -rf $(VENV)

# Two commands a new engineer needs: `make run` and `make test`.
# Both create (or reuse) the virtual environment in .venv. `make run` installs only what
# serving needs; `make test` adds the development tools (pytest, ruff, mypy, Playwright).

VENV      ?= .venv
PY        := $(VENV)/bin/python
RUN_STAMP := $(VENV)/.run-stamp
DEV_STAMP := $(VENV)/.dev-stamp
HOST      ?= 127.0.0.1
PORT      ?= 8000

.PHONY: run test lint bench bench-load clean-venv

$(VENV)/bin/python:
	@echo "==> creating the virtual environment in $(VENV)"
	python3 -m venv $(VENV)
	@echo "==> upgrading pip"
	$(PY) -m pip install --progress-bar on --upgrade pip

$(RUN_STAMP): pyproject.toml $(VENV)/bin/python
	@echo "==> installing Foldwise and what serving needs (numpy, scipy, FastAPI, ...): a minute or two the first time"
	$(PY) -m pip install --progress-bar on -e .
	touch $(RUN_STAMP)

$(DEV_STAMP): pyproject.toml $(RUN_STAMP)
	@echo "==> installing the development tools (pytest, ruff, mypy, Playwright, ...)"
	$(PY) -m pip install --progress-bar on -e '.[dev]'
	touch $(DEV_STAMP)

run: $(RUN_STAMP)
	@echo "==> serving on http://$(HOST):$(PORT)/ (SQLite store in ./data; HOST= and PORT= change the address; Ctrl-C stops)"
	$(VENV)/bin/foldwise serve --host $(HOST) --port $(PORT)

lint: $(DEV_STAMP)
	@echo "==> ruff (lint and format check) and mypy"
	$(VENV)/bin/ruff check service tests bench
	$(VENV)/bin/ruff format --check service tests bench
	$(VENV)/bin/mypy

test: lint
	@echo "==> checking the Debian packages the tests need (chromium, wrk)"
	bash scripts/system-packages
	@echo "==> the whole test suite"
	$(PY) -m pytest

bench: $(DEV_STAMP)
	$(PY) bench/fold_engine.py
	$(PY) bench/fold_http.py
	$(PY) bench/diagnose.py
	$(PY) bench/plan.py
	$(PY) bench/audit.py

bench-load: $(DEV_STAMP)
	$(PY) bench/load.py

clean-venv:
	rm -rf $(VENV)

# Two commands for a fresh machine (see README.md):
#   make lab    set up .venv and open the tour notebook in JupyterLab
#   make test   set up .venv (and Debian's chromium when root) and run the whole suite
# Installs are idempotent: a stamp inside .venv, named after a hash of pyproject.toml, records
# that the current dependency set is installed, so a second run goes straight to work.

SHELL := /bin/bash
.DEFAULT_GOAL := help

PYTHON ?= python3
VENV := .venv
VPY := $(VENV)/bin/python
CHROMIUM := /usr/bin/chromium
EXTRAS := test
PYPROJECT_HASH := $(shell sha256sum pyproject.toml | cut -c1-16)
STAMP := $(VENV)/.mwkin-installed-$(PYPROJECT_HASH)
ALLOW_ROOT := $(if $(filter 0,$(shell id -u)),--allow-root,)
TOUR := example_notebooks/01_tour.ipynb
PYTEST_ARGS ?=

.PHONY: help install lab test test-python test-js chromium bench lint docs

help:
	@echo "make lab     set up .venv and open $(TOUR) in JupyterLab"
	@echo "make test    set up .venv (+ chromium when root) and run make lint, the node tests, pytest and make docs"
	@echo "make lint    ruff check, ruff format --check, mypy on the core"
	@echo "make bench   run every benchmarks/bench_*.py in turn"
	@echo "make docs    build the documentation site (docs/_build/html; runs the example notebooks)"

$(VPY):
	$(PYTHON) -m venv $(VENV)

# A new hash (pyproject.toml changed) means a new stamp name, hence a reinstall.
$(STAMP): | $(VPY)
	$(VPY) -m pip install -e '.[$(EXTRAS)]'
	rm -f $(VENV)/.mwkin-installed-*
	touch $@

install: $(STAMP)

lab: install
	@if [ -f $(TOUR) ]; then \
	  exec $(VENV)/bin/jupyter lab $(ALLOW_ROOT) --ServerApp.root_dir=example_notebooks $(TOUR); \
	else \
	  echo "note: $(TOUR) is not there yet; opening the folder instead"; \
	  exec $(VENV)/bin/jupyter lab $(ALLOW_ROOT) --ServerApp.root_dir=example_notebooks; \
	fi

# Debian's chromium for the browser tests (Playwright may not download its own browser here).
# Without root we only say so: outside CI the browser tests then skip; with CI=true they fail.
chromium:
	@if [ -x $(CHROMIUM) ]; then :; \
	elif [ "$$(id -u)" = 0 ]; then \
	  apt-get update && DEBIAN_FRONTEND=noninteractive apt-get install -y chromium; \
	else \
	  echo "warning: $(CHROMIUM) is missing and we are not root; install Debian's chromium for the browser tests"; \
	fi

# Node's own discovery rules differ between versions, so we hand it the list of files that match
# its default test-name patterns. No JS test yet is not a failure; a failing JS test is.
JS_TEST_RE := .*/([^/]*[._-]test|test-[^/]*|test)\.[cm]?js|.*/test/.*\.[cm]?js
JS_TESTS = $(shell find js -path '*/node_modules' -prune -o -type f -regextype posix-extended \
  -regex '$(JS_TEST_RE)' -print 2>/dev/null | sort)

test-js:
	@if [ -z "$(strip $(JS_TESTS))" ]; then \
	  echo "node tests: none found under js/"; \
	else \
	  node --test $(JS_TESTS); \
	fi

test-python: install
	$(VPY) -m pytest $(PYTEST_ARGS)

# Lint first (seconds), node tests, then pytest, then the documentation build; all four always run
# and the target fails if any failed.
test: install chromium
	@rc=0; \
	$(MAKE) --no-print-directory lint || rc=1; \
	$(MAKE) --no-print-directory test-js || rc=1; \
	$(MAKE) --no-print-directory test-python || rc=1; \
	$(MAKE) --no-print-directory docs || rc=1; \
	exit $$rc

# ruff (lint and format, configured in pyproject.toml) over the repository, mypy over the core.
lint: install
	$(VENV)/bin/ruff check .
	$(VENV)/bin/ruff format --check .
	$(VENV)/bin/mypy

# The documentation site, warnings as errors; it executes the example notebooks (see docs/conf.py).
docs: install
	$(VENV)/bin/sphinx-build -W --keep-going -b html docs docs/_build/html

bench: install
	@shopt -s nullglob; files=(benchmarks/bench_*.py); \
	if [ $${#files[@]} -eq 0 ]; then echo "no benchmarks/bench_*.py yet"; exit 0; fi; \
	rc=0; for f in "$${files[@]}"; do \
	  echo "== $$f"; $(VPY) "$$f" || rc=1; \
	done; exit $$rc

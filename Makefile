# Rotorbook: every target creates .venv on first use and installs what it needs.
SHELL := /bin/bash
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed-stamp
DEMO_DESIGNS := $(wildcard data/designs/*.toml)
# an invented second revision of a demo design, recorded with its comparison page
DEMO_REVISION := data/revisions/survey_quad_rev_b.toml
DEMO_PREVIOUS := data/designs/survey_quad.toml
export ROTORBOOK_CACHE_DIR ?= $(CURDIR)/.cache/rotorbook

.PHONY: demo test test-fast lint bench fuzz lab chromium snapshots outputs clean

$(STAMP): pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install -q --upgrade pip
	$(PY) -m pip install -q -e '.[test]'
	touch $(STAMP)

# Debian's chromium for the browser tests; installed when missing and running as root (as CI does).
chromium:
	@if ! command -v chromium >/dev/null 2>&1; then \
	  if [ "$$(id -u)" = 0 ]; then \
	    echo "installing Debian chromium for the browser tests"; \
	    apt-get update -q >/dev/null && DEBIAN_FRONTEND=noninteractive apt-get install -y -q chromium >/dev/null; \
	  else echo "chromium is missing and this is not root: browser tests will be skipped"; fi; \
	fi

## make demo: check every demo design, record it into records/<design>/, print the index pages;
## then record the invented revision B of the survey quad with its comparison against revision A
demo: $(STAMP)
	$(VENV)/bin/rotorbook check $(DEMO_DESIGNS)
	@for f in $(DEMO_DESIGNS); do \
	  out=records/$$(basename $$f .toml); \
	  $(VENV)/bin/rotorbook record $$f --out $$out --force 2> >(grep -v 'without encryption' >&2) || exit 1; \
	done
	$(VENV)/bin/rotorbook record $(DEMO_REVISION) --previous $(DEMO_PREVIOUS) \
	  --out records/$$(basename $(DEMO_REVISION) .toml) --force 2> >(grep -v 'without encryption' >&2)
	@echo "Calculation records (open in a browser):"
	@for f in $(DEMO_DESIGNS) $(DEMO_REVISION); do echo "  $(CURDIR)/records/$$(basename $$f .toml)/index.html"; done
	@echo "Revision comparison: $(CURDIR)/records/$$(basename $(DEMO_REVISION) .toml)/compare_A_to_B.html"

lint: $(STAMP)
	$(PY) -m ruff check kit tests workbooks
	$(PY) -W error -m compileall -q kit
	$(PY) -m mypy --ignore-missing-imports kit/numeric kit/symbolic/structure.py kit/symbolic/cache.py

## make test: lint, unit/property/derivation tests, workbooks under nbval, browser tests
test: $(STAMP) chromium lint
	$(PY) -m pytest -n 2 --dist loadfile tests
	@if ls workbooks/*.ipynb >/dev/null 2>&1; then \
	  $(PY) -m pytest --nbval --nbval-current-env workbooks --nbval-sanitize-with workbooks/sanitize.cfg -n 2 --dist loadfile; \
	fi

test-fast: $(STAMP)
	$(PY) -m pytest -n 2 --dist loadfile -m "not slow" tests

## make bench: speed and memory, as ratios measured in one run (never fails on time);
## bench_browser.py times the panels in JupyterLab driven in Debian's chromium
bench: $(STAMP) chromium
	@for b in tests/bench/bench_*.py; do echo "== $$b"; $(PY) $$b || exit 1; done

## make fuzz: 10,000 mutated demo designs through check and analyze; 2,000 each of mutated stand
## files, shorthand sections, design folders (history) and wrong options; 1,000 compared pairs of
## analyses; prints the outcomes by kind
fuzz: $(STAMP)
	$(PY) tests/bench/fuzz_designs.py --cases 10000
	$(PY) tests/bench/fuzz_designs.py --target stand shorthand history options --cases 2000
	$(PY) tests/bench/fuzz_designs.py --target compare --cases 1000

## make lab: JupyterLab on 127.0.0.1 over the workbooks
## (no update check and no news fetch: the server never goes online; --allow-root when root)
lab: $(STAMP)
	$(VENV)/bin/jupyter lab --ip=127.0.0.1 --no-browser \
	  --ServerApp.jpserver_extensions="{'kit.panels.serve': True}" --ServerApp.root_dir=$(CURDIR) \
	  --LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate --LabApp.news_url=None \
	  $$(if [ "$$(id -u)" = 0 ]; then echo --allow-root; fi)

## make outputs: regenerate the workbook templates and their stored outputs (commit on its own)
outputs: $(STAMP)
	$(PY) workbooks/make_templates.py --execute

## make snapshots: rewrite the derivation snapshots (commit on its own, saying why)
snapshots: $(STAMP)
	$(PY) -m kit.symbolic.snapshots --refresh

clean:
	rm -rf records .cache .pytest_cache .hypothesis

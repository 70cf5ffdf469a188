# Build helper. Every target creates .venv itself (idempotent) and installs the project into it.
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed-stamp
EXAMPLE ?= resources/examples/conveyor_speed.loop.json

.PHONY: run test test-slow check bench lint screenshots clean

$(STAMP): pyproject.toml
	test -x $(PY) || python3 -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test]'
	touch $(STAMP)

run: $(STAMP)          ## start the desktop app on the shipped example
	$(PY) -m app $(EXAMPLE)

test: $(STAMP)         ## the whole default test suite (offscreen)
	QT_QPA_PLATFORM=offscreen $(PY) -m pytest -q

test-slow: $(STAMP)    ## long property runs (10,000 random polynomials and more)
	QT_QPA_PLATFORM=offscreen $(PY) -m pytest -q -m slow

check: $(STAMP)        ## the command line on the shipped example
	$(PY) -m core check $(EXAMPLE)

bench: $(STAMP)        ## speed table (reported, never asserted)
	QT_QPA_PLATFORM=offscreen $(PY) -m bench

lint: $(STAMP)         ## ruff (rules in pyproject.toml) on every package, mypy on core/
	$(PY) -m ruff check core app tests bench
	$(PY) -m mypy

screenshots: $(STAMP)  ## render every shipped example to docs/screenshots/
	mkdir -p docs/screenshots
	for f in resources/examples/*.loop.json; do \
	  QT_QPA_PLATFORM=offscreen $(PY) -m app --screenshot docs/screenshots/$$(basename $$f .loop.json).png $$f || exit 1; \
	done

clean:
	rm -rf $(VENV) *.egg-info

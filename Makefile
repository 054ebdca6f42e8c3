# One venv per checkout; every target installs what it needs first.
PYTHON ?= python3
VENV   ?= .venv
BIN     = $(VENV)/bin

.PHONY: install serve test bench spec sanitize clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip

# What an install depends on: when none of it changed, an install does nothing.
SOURCES = pyproject.toml setup.py service/model/_arcscan.pyx service/model/_firstseen.pyx
RUNTIME = $(VENV)/.installed-runtime
TESTING = $(VENV)/.installed-test

# The request-body scanner is compiled at install (Cython, a C compiler).
$(RUNTIME): $(SOURCES) | $(BIN)/python
	bash .ci/ensure-compiler $(BIN)/python
	$(BIN)/pip install --quiet -e .
	touch $@

# The test extras include the runtime.
$(TESTING): $(SOURCES) | $(BIN)/python
	bash .ci/ensure-compiler $(BIN)/python
	$(BIN)/pip install --quiet -e ".[test]"
	touch $@ $(RUNTIME)

install: $(TESTING)

# The service's runtime dependencies only (no test tools), installed once.
serve: $(RUNTIME)
	$(BIN)/sluice serve

# pytest exits 5 when it collected no test: that is a failure here, not a pass.
test: install
	bash .ci/ensure-redis
	bash .ci/ensure-browser
	bash .ci/sanitize-scanner $(BIN)/python 20000
	$(BIN)/python -m pytest -q; rc=$$?; \
	if [ $$rc -eq 5 ]; then echo "make test: pytest collected no tests" >&2; exit 1; fi; exit $$rc

bench: install
	$(BIN)/python -m tests.perf

# The compiled body scanner under AddressSanitizer and UBSan, with its mutation fuzzer.
sanitize: install
	bash .ci/sanitize-scanner $(BIN)/python

spec: install
	$(BIN)/sluice spec > openapi/openapi.yaml

clean:
	rm -rf $(VENV) .pytest_cache .hypothesis

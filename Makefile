# Two commands set up everything on a fresh Debian/Ubuntu machine:
#   make demo   installs figfolio in .venv, builds the demo catalogue and opens it
#   make test   installs what the tests need (Debian packages, Python packages) and runs them
PY      ?= python3
VENV    := .venv
BIN     := $(VENV)/bin

.PHONY: demo test venv test-env system bench clean

$(BIN)/python:
	$(PY) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip

venv: $(BIN)/python
	$(BIN)/pip install --quiet -c constraints.txt -e '.[demo]'

demo: venv
	$(BIN)/figfolio build
	$(BIN)/python scripts/open_site.py build/site/index.html

system:
	bash scripts/install-system-packages

test-env: $(BIN)/python system
	$(BIN)/pip install --quiet -c constraints.txt -e '.[test]'
	cd tests/browser && npm ci --no-audit --no-fund --silent

test: test-env
	$(BIN)/python -m pytest -q -p no:cacheprovider

bench: venv
	$(BIN)/python benchmarks/bench_build.py

clean:
	rm -rf build .pytest_cache

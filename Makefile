# labelstudy: two commands for people (make demo, make test), a few for developers.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
PIP    := $(PY) -m pip
DEMO_DIR ?= demo-project
PORT   ?= 8150
CHROMIUM := /usr/bin/chromium

.PHONY: demo test venv install install-test browser bench clean wheel

$(VENV)/bin/python:
	$(PYTHON) -m venv $(VENV)
	$(PIP) install --quiet --upgrade pip

$(VENV)/.installed: $(VENV)/bin/python pyproject.toml setup.py
	$(PIP) install --quiet -e .
	touch $@

$(VENV)/.installed-test: $(VENV)/bin/python pyproject.toml setup.py
	$(PIP) install --quiet -e '.[test]'
	touch $(VENV)/.installed $@

install: $(VENV)/.installed
install-test: $(VENV)/.installed-test

# The browser tests drive Debian's chromium (never a browser downloaded by a test tool).
browser:
	@if [ ! -x $(CHROMIUM) ]; then \
	  echo "Installing Debian's chromium for the browser tests"; \
	  if [ "$$(id -u)" = "0" ]; then SUDO=""; else SUDO="sudo"; fi; \
	  $$SUDO apt-get update -qq && DEBIAN_FRONTEND=noninteractive $$SUDO apt-get install -y -qq chromium >/dev/null; \
	fi

demo: install
	$(VENV)/bin/labelstudy demo --dir $(DEMO_DIR) --port $(PORT)

test: install-test browser
	$(PY) -m pytest -q

bench: install-test
	$(PY) benchmarks/bench_agreement.py
	$(PY) benchmarks/load_judges.py

wheel: install-test
	$(PY) -m build --wheel --outdir dist .

clean:
	rm -rf build dist *.egg-info .pytest_cache artifacts

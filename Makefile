# Two commands do everything on a fresh machine:
#   make demo   set up .venv and run the main job on the bundled (synthetic) demo study
#   make test   set up .venv with the test extras (and Debian chromium) and run the whole suite
PYTHON ?= python3
VENV   ?= .venv
PY     := $(VENV)/bin/python

.PHONY: demo test bench browser-deps clean

$(VENV)/.stamp-base:
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install -q --upgrade pip
	touch $@

# the notebooks extra includes the widgets extra (ipywidgets, bqplot) and installs the pkwidgets command
$(VENV)/.stamp-demo: pyproject.toml $(VENV)/.stamp-base
	$(PY) -m pip install -q -e ".[notebooks]"
	$(PY) -m ipykernel install --sys-prefix --name python3 >/dev/null
	touch $@

# the test extra includes the widgets, notebooks, browser and dask extras
$(VENV)/.stamp-test: pyproject.toml $(VENV)/.stamp-base
	$(PY) -m pip install -q -e ".[test]"
	$(PY) -m ipykernel install --sys-prefix --name python3 >/dev/null
	touch $@

# Real-browser tests use Debian's chromium (never a downloaded browser build).
browser-deps:
	@command -v chromium >/dev/null 2>&1 || { \
	  echo "installing Debian chromium for the browser tests"; \
	  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium >/dev/null; }

demo: $(VENV)/.stamp-demo
	$(PY) data/make_demo.py
	$(VENV)/bin/pkwidgets demo

test: $(VENV)/.stamp-test browser-deps
	$(PY) -m pytest

bench: $(VENV)/.stamp-test
	$(PY) bench/nca_speed.py
	$(PY) bench/terminal_accuracy.py
	$(PY) bench/design_speed.py
	$(PY) bench/widget_speed.py

clean:
	rm -rf results tests/_output .pytest_cache

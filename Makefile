# Two commands for a newcomer:  make demo  and  make test.
# Both create their own virtual environment in .venv.

PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: demo test test-fast browser bench clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install -q --upgrade pip
	$(PY) -m pip install -q -e '.[test,cluster]'
	touch $(STAMP)

demo: $(STAMP)
	$(VENV)/bin/instgen breed presets/demo.toml --out outputs/demo
	@echo
	@echo "Open outputs/demo/report.html in a browser to see the run."

test: $(STAMP) browser
	$(PY) -m pytest -q

test-fast: $(STAMP) browser
	$(PY) -m pytest -q -m "not slow"

# headless Chromium for the 2 browser tests (apt-get install chromium when it is missing)
browser:
	@bash .ci/browser

bench: $(STAMP)
	$(PY) -m benchmarks

clean:
	rm -rf $(VENV) outputs/demo

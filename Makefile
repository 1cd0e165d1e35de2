# Two set-up commands: `make demo` (install + build the demo projects), `make test`.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test install clean bench

$(STAMP): pyproject.toml
	bash .ci/system-packages runtime
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install -q --upgrade pip
	$(BIN)/pip install -q -e '.[test]'
	$(BIN)/python -c "import matplotlib.pyplot"   # build the font cache once, at install time
	touch $(STAMP)

install: $(STAMP)

demo: $(STAMP)
	$(BIN)/python -m calcsheaf.demo projects

test: $(STAMP)
	bash .ci/system-packages test
	$(BIN)/python -m pytest

bench: $(STAMP)
	$(BIN)/python bench/run.py

clean:
	rm -rf projects/*/_site projects/*/.calcsheaf-cache

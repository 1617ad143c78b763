# Two commands do all the set-up on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: test demo bench venv clean

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

venv: $(STAMP)

test: $(STAMP)
	$(BIN)/python -m pytest -q

demo: $(STAMP)
	$(BIN)/python scripts/demo.py

bench: $(STAMP)
	$(BIN)/python benchmarks/bench_engine.py

clean:
	rm -rf $(VENV) build src/*.egg-info .pytest_cache

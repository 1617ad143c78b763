# Two commands do all the set-up on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed
LAB_PORT ?= 8890

.PHONY: test lint demo demo-report bench venv clean notebooks

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	$(BIN)/python -m ipykernel install --sys-prefix --name python3 --display-name "Python 3 (lagsight)" >/dev/null
	touch $(STAMP)

venv: $(STAMP)

# lint, format and type checks first (configured in pyproject.toml), then the whole suite
test: $(STAMP)
	$(BIN)/ruff check src tests benchmarks scripts
	$(BIN)/ruff format --check src tests benchmarks scripts
	$(BIN)/mypy
	$(BIN)/python -m pytest -q

# JupyterLab on the quickstart notebook (Ctrl-C to stop); the URL is printed below.
demo: $(STAMP)
	@echo "Opening JupyterLab on example_notebooks/quickstart.ipynb"
	@echo "URL: http://127.0.0.1:$(LAB_PORT)/lab/tree/example_notebooks/quickstart.ipynb"
	MPLBACKEND=Agg $(BIN)/jupyter lab --no-browser --ip=127.0.0.1 --port=$(LAB_PORT) \
		--ServerApp.token='' --ServerApp.password='' $(if $(filter 0,$(shell id -u)),--allow-root,) \
		example_notebooks/quickstart.ipynb

# Headless: execute the quickstart notebook and write the standalone HTML report.
demo-report: $(STAMP)
	MPLBACKEND=Agg $(BIN)/python scripts/demo.py

# lint and types only (what `make test` runs before pytest)
lint: $(STAMP)
	$(BIN)/ruff check src tests benchmarks scripts
	$(BIN)/ruff format --check src tests benchmarks scripts
	$(BIN)/mypy

bench: $(STAMP)
	$(BIN)/python benchmarks/bench_engine.py
	$(BIN)/python benchmarks/bench_diagnose.py
	$(BIN)/python benchmarks/bench_panel.py
	$(BIN)/python benchmarks/bench_screen.py
	$(BIN)/python benchmarks/bench_verdict.py
	$(BIN)/python benchmarks/bench_scale.py
	if [ -x /usr/bin/chromium ]; then $(BIN)/python benchmarks/bench_browser.py; \
	else echo "bench_browser.py skipped: no /usr/bin/chromium"; fi

notebooks: $(STAMP)
	$(BIN)/python scripts/make_notebooks.py

clean:
	rm -rf $(VENV) build src/*.egg-info .pytest_cache

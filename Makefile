# The two commands a user needs: `make demo` and `make test`.
# Each creates .venv and installs the project into it when missing, with the extras the tests use
# (test: pytest and ruff; dask: the Dask executor's tests run a real cluster on 127.0.0.1).
PY ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
EXAMPLE := $(VENV)/.example-plugin

export MPLBACKEND := Agg

.PHONY: demo test test-all lint bench clean grid

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PY) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test,dask]'
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/radwalk demo

# The tests use the example opacity plugin as an installed package (entry-point discovery).
$(EXAMPLE): $(STAMP) examples/opacity_plugin/pyproject.toml examples/opacity_plugin/radwalk_bent_power.py
	$(BIN)/python -m pip install --quiet --force-reinstall --no-deps ./examples/opacity_plugin
	touch $(EXAMPLE)

test: $(STAMP) $(EXAMPLE)
	MPLCONFIGDIR=$$(mktemp -d) RADWALK_CACHE=$${RADWALK_CACHE:-$(CURDIR)/.cache} $(BIN)/python -m pytest -q \
		tests examples/opacity_plugin/tests

test-all: $(STAMP) $(EXAMPLE)
	MPLCONFIGDIR=$$(mktemp -d) $(BIN)/python -m pytest -q -m ''

lint: $(STAMP)
	$(BIN)/ruff check pipeline plugins tests benchmarks examples setup.py

bench: $(STAMP)
	$(BIN)/python benchmarks/sampler_cost.py
	$(BIN)/python benchmarks/catalog_throughput.py --memory 500

clean:
	rm -rf $(VENV) build *.egg-info radwalk-demo

# The shipped grid of the default stages (~10 minutes on 2 cores). Re-run after any change to the solver or
# the default opacity (tests/forward/test_shipped_grid.py says so); the old file is replaced.
grid: $(STAMP)
	rm -rf .grid-new
	$(BIN)/radwalk grid build --into .grid-new
	mkdir -p pipeline/data/grids
	rm -f pipeline/data/grids/trackgrid-*.npz
	mv .grid-new/trackgrid-*.npz pipeline/data/grids/
	rm -rf .grid-new

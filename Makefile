# The two commands a user needs: `make demo` and `make test`.
# Each creates .venv and installs the project into it when missing.
PY ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
EXAMPLE := $(VENV)/.example-plugin

export MPLBACKEND := Agg

.PHONY: demo test test-all lint bench clean

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PY) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
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
	$(BIN)/python benchmarks/catalog_throughput.py

clean:
	rm -rf $(VENV) build *.egg-info radwalk-demo

# Two entry points for a fresh machine: `make demo` and `make test`.
# Each builds .venv from nothing with the machine's python3.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test bench clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e ".[test,dask]"
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/reachgauge demo --out demo_output

test: $(STAMP)
	$(BIN)/python -m pytest -q

bench: $(STAMP)
	$(BIN)/python benchmarks/bench_section.py
	$(BIN)/python benchmarks/bench_cutting.py
	$(BIN)/python benchmarks/bench_bankfull.py
	$(BIN)/python benchmarks/bench_slope.py
	$(BIN)/python benchmarks/bench_batch.py
	$(BIN)/python benchmarks/bench_speed.py
	$(BIN)/python benchmarks/bench_region.py
	$(BIN)/python benchmarks/bench_memory.py

clean:
	rm -rf $(VENV) demo_output .pytest_cache .hypothesis

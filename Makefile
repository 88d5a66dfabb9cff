# Two commands for a new user: `make demo` and `make test`. Each bootstraps what it needs:
# Debian's libngspice0 and libklu1 (installed when run as root, otherwise the exact command is
# printed; libklu1 is optional, as kvxopt's wheel carries a KLU too), a .venv, and `pip install -e .[test]`.

PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed
NGSPICE_LIB := /usr/lib/$(shell uname -m)-linux-gnu/libngspice.so.0
APT_PACKAGES := libngspice0 libngspice0-dev libklu1
have_lib = ldconfig -p 2>/dev/null | grep -q '$(1) '

.PHONY: demo test test-full test-spice bench fuzz-full system-libs venv clean

demo: $(STAMP) system-libs
	$(BIN)/crosscheck reduce corpus/audio/mixer_line_out.cir --port far_end 0 --freq 20 1k 20k
	$(BIN)/crosscheck verify corpus --output out/corpus-report.html

test: $(STAMP) system-libs
	$(BIN)/python -m pytest -m "not slow" -p no:cacheprovider

# Everything, including the long fuzz runs and large networks (not part of CI).
test-full: $(STAMP) system-libs
	$(BIN)/python -m pytest -p no:cacheprovider --hypothesis-profile=full

bench: $(STAMP) system-libs
	$(BIN)/python -m crosscheck.bench

fuzz-full: $(STAMP) system-libs
	$(BIN)/crosscheck fuzz --count 10000 --seed 1 --out out/fuzz

system-libs:
	@if { [ -e "$(NGSPICE_LIB)" ] || $(call have_lib,libngspice.so.0); } && $(call have_lib,libklu.so.1); then \
	  exit 0; \
	elif [ "$$(id -u)" = 0 ]; then \
	  echo "Installing ngspice's shared library and KLU (Debian: $(APT_PACKAGES))"; \
	  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $(APT_PACKAGES); \
	elif [ -e "$(NGSPICE_LIB)" ] || $(call have_lib,libngspice.so.0); then \
	  echo "Optional: Debian's KLU (libklu1) is not installed; kvxopt's copy is used. To use Debian's, run as root:"; \
	  echo "    sudo apt-get install -y libklu1"; \
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

$(STAMP): $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install -q --upgrade pip
	$(BIN)/python -m pip install -q -e '.[test]'
	@touch $(STAMP)

venv: $(STAMP)

clean:
	rm -rf $(VENV) out .pytest_cache .hypothesis build *.egg-info

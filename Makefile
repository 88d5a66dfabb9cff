# Two commands for a new user: `make demo` and `make test`. Each bootstraps what it needs:
# Debian's libngspice0 (installed when run as root, otherwise the exact command is printed),
# a .venv, and `pip install -e .[test]`.

PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed
NGSPICE_LIB := /usr/lib/$(shell uname -m)-linux-gnu/libngspice.so.0
APT_PACKAGES := libngspice0 libngspice0-dev

.PHONY: demo test test-full test-spice bench fuzz-full ngspice venv clean

demo: $(STAMP) ngspice
	$(BIN)/crosscheck reduce corpus/audio/mixer_line_out.cir --port far_end 0 --freq 20 1k 20k
	$(BIN)/crosscheck verify corpus --output out/corpus-report.html

test: $(STAMP) ngspice
	$(BIN)/python -m pytest -m "not slow" -p no:cacheprovider

# Everything, including the long fuzz runs and large networks (not part of CI).
test-full: $(STAMP) ngspice
	$(BIN)/python -m pytest -p no:cacheprovider --hypothesis-profile=full

bench: $(STAMP) ngspice
	$(BIN)/python -m crosscheck.bench

fuzz-full: $(STAMP) ngspice
	$(BIN)/crosscheck fuzz --count 10000 --seed 1 --out out/fuzz

ngspice:
	@if [ -e "$(NGSPICE_LIB)" ] || ldconfig -p 2>/dev/null | grep -q 'libngspice.so.0 '; then \
	  exit 0; \
	elif [ "$$(id -u)" = 0 ]; then \
	  echo "Installing ngspice's shared library (Debian: $(APT_PACKAGES))"; \
	  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $(APT_PACKAGES); \
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

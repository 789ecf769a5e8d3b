# Two commands on a fresh machine with Python 3.11+: `make demo` (install, then score the demo set)
# and `make test`. Both install into .venv on first use and are safe to run again.
PY ?= python3
VENV := .venv
STAMP := $(VENV)/.installed

.PHONY: demo test system

demo: $(STAMP)
	$(VENV)/bin/qacheck run scenarios/caldreth-port --outputs writer-v1 --results results/port-v1

test: $(STAMP)
	$(VENV)/bin/python -m pytest -q

# torch==2.13.0 first: it is the CPU build; a bare torch would pull a multi-GB CUDA build
$(STAMP): pyproject.toml
	$(PY) -m venv $(VENV)
	$(VENV)/bin/pip install -q torch==2.13.0
	$(VENV)/bin/pip install -q -e '.[train,eval,test,ray]'
	touch $@

# optional, as root on Debian: WordNet 3.0 (opposite words) and chromium (the HTML report test)
system:
	apt-get update -q && DEBIAN_FRONTEND=noninteractive apt-get install -y -q wordnet-base chromium

# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
#
# The README's two commands: `make demo` and `make test`. Both create .venv when it is
# missing and (re)install the pinned requirements and the package only when the
# requirement files or setup.py changed (stamp file .venv/.installed).
#
#   make venv     create/refresh the virtual environment only
#   make demo     the most complete demonstration that exists (see DEMO_ARGS)
#   make test     the lints, then pytest over test/
#   make lint     ruff, mypy, ament_flake8, ament_pep257
#   make fix      let ruff fix what it can (import order, quotes, docstring layout)
#   make bench    `corridor-pid bench` on this computer
#   make clean    build outputs and caches (keeps the venvs); distclean removes them too
#
# Override: PYTHON=python3.12 VENV=.venv-3.12 make test;  PYTEST_ARGS='-m "not slow"'.

PYTHON ?= $(shell command -v python3.11 2>/dev/null || command -v python3)
VENV ?= .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
REQUIREMENTS := requirements/run.txt requirements/offline.txt requirements/test.txt
PIP_VERSION := 26.3
PYTEST_ARGS ?=

# DDS stays on this machine. Tests, the demo and the benchmark claim a domain id of their
# own with a lock (corridor_pid.ros.isolation); this per-invocation id is the fallback
# for anything else started from here.
export ROS_AUTOMATIC_DISCOVERY_RANGE := LOCALHOST
ROS_DOMAIN_ID ?= $(shell echo $$(( $$$$ % 100 + 1 )))
export ROS_DOMAIN_ID
unexport ROS_LOCALHOST_ONLY ROS_STATIC_PEERS ROS_DISCOVERY_SERVER

# Until the DDS demo verb exists, the demo is a real closed-loop run of the core.
DEMO_SCENARIO := $(firstword $(wildcard config/scenarios/hospital_corridor_bay_exit.yaml) \
                             $(sort $(wildcard config/scenarios/*.yaml)))
DEMO_ARGS ?= $(if $(wildcard corridor_pid/commands/demo.py),demo --out out/demo,\
                  simulate $(DEMO_SCENARIO))

.PHONY: venv demo test lint fix bench clean distclean

venv: $(STAMP)

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)

$(STAMP): $(BIN)/python $(REQUIREMENTS) setup.py setup.cfg
	$(BIN)/python -m pip install --quiet pip==$(PIP_VERSION)
	$(BIN)/python -m pip install --quiet -r requirements/test.txt
	$(BIN)/python -m pip install --quiet --no-deps --no-build-isolation -e .
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/corridor-pid $(DEMO_ARGS)

# ruff and mypy, then ROS's ament_flake8 and ament_pep257 (they catch a few things ruff has
# no rule for: continuation-line indents, class attributes named like builtins). The ament
# tools list every file they check, so their output shows only when they fail.
lint: $(STAMP)
	$(BIN)/ruff check .
	$(BIN)/mypy
	@out=$$($(BIN)/ament_flake8 corridor_pid setup.py 2>&1) || { echo "$$out"; exit 1; }
	@out=$$($(BIN)/ament_pep257 corridor_pid setup.py --convention google 2>&1) \
	  || { echo "$$out"; exit 1; }
	@echo 'lint: ruff, mypy, ament_flake8, ament_pep257 passed'

# pytest's exit code 5 means no test ran: that is a failure too, said plainly.
# SKIP_LINT=1 runs the tests alone (.ci/run does so on the second and third interpreter:
# the lints already ran once, and older numpy type stubs on 3.10 read differently).
test: $(if $(SKIP_LINT),$(STAMP),lint)
	$(BIN)/python -m pytest test/ $(PYTEST_ARGS) || { status=$$?; \
	  if [ $$status -eq 5 ]; then echo 'make test: pytest ran no test (exit 5)' >&2; fi; \
	  exit $$status; }

fix: $(STAMP)
	$(BIN)/ruff check --fix .

bench: $(STAMP)
	$(BIN)/corridor-pid bench

clean:
	rm -rf build install log out .pytest_cache .mypy_cache .ruff_cache .hypothesis \
	       corridor_pid.egg-info
	find . -name __pycache__ -type d -not -path './.venv*' -prune -exec rm -rf {} +

distclean: clean
	rm -rf .venv .venv-*

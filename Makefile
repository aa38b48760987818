# Everything a newcomer needs: `make serve` and `make test` set up their own venv.
PYTHON ?= python3
VENV   ?= .venv
BIN     = $(VENV)/bin
DECK   ?= service/etchguard/data/lumen-6m.toml
NETS   ?= service/etchguard/data/lumen-demo-nets.json

# The machine's cmake, else the one make venv put in the venv from PyPI (where the
# machine had none).
CMAKE  ?= $(shell command -v cmake || echo $(BIN)/cmake)

# Server threads for `make serve`: the core does the work on the machine's cores (it
# releases the GIL), and an open session stream holds a thread while it waits for its
# router, so a few per core, at least 8 (two routers' worth on a small machine).
WORKERS ?= $(shell n=$$(nproc 2>/dev/null || echo 2); echo $$(( n * 4 > 8 ? n * 4 : 8 )))

.PHONY: help venv proto serve test lint check bench clean core-test
.DEFAULT_GOAL := help

help:  # what each target does (a bare `make` prints this)
	@echo "make serve        set up .venv and serve the demo deck on 127.0.0.1:50051 ($(WORKERS) workers; WORKERS=N, DECK=FILE)"
	@echo "make test         set up .venv, lint (ruff), type-check (mypy) and run every test"
	@echo "make lint         only ruff and mypy on the package"
	@echo "make check        the offline check of the demo block (NETS=FILE, DECK=FILE)"
	@echo "make demo         route an invented block antenna-blind, then antenna-aware, and compare"
	@echo "make bench        benchmark tables (ratios measured in one run)"
	@echo "make core-test    the C++ core's own tests under AddressSanitizer and UBSan"
	@echo "make cpp-example  build and run the C++ client example"
	@echo "make proto        regenerate the gRPC stubs from proto/"
	@echo "make venv         only set up .venv (builds the core)"
	@echo "make clean        remove .venv and build trees"
	@echo "exit status of etchguard: 0 legal/done, 1 violations found, 2 bad input, 3 internal fault"

# The compiled core (etchguard._core, built by scikit-build-core from CMakeLists.txt and
# core/) is rebuilt when any of these change, so `make test` after a C++ edit runs the
# new code. The build requirements (pyproject.toml's build-system.requires) live in the
# venv and the CMake tree is kept in build/<wheel tag>, so a rebuild compiles only what
# changed (with pip's default build isolation nanobind would be recompiled every time).
CORE_INPUTS := CMakeLists.txt core/CMakeLists.txt \
	$(wildcard core/include/etchguard/*.hpp core/src/*.cpp core/src/*.hpp core/src/*.h \
	           core/python/*.cpp core/python/*.hpp core/python/*.h)
# cmake and ninja come from PyPI only where the machine lacks them (scikit-build-core
# says which it needs).
STATIC_REQUIRES = $(BIN)/python -c 'import tomllib; \
	print(*tomllib.load(open("pyproject.toml", "rb"))["build-system"]["requires"], sep="\n")'
DYNAMIC_REQUIRES = $(BIN)/python -c 'from scikit_build_core.build import \
	get_requires_for_build_editable as g; print(*g(), sep="\n")'

$(BIN)/etchguard: pyproject.toml $(CORE_INPUTS)
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip
	$(STATIC_REQUIRES) > $(VENV)/build-requires.txt
	$(BIN)/pip install --quiet -r $(VENV)/build-requires.txt
	$(DYNAMIC_REQUIRES) > $(VENV)/build-requires-more.txt
	$(BIN)/pip install --quiet -r $(VENV)/build-requires-more.txt
	$(BIN)/pip install --quiet --no-build-isolation -e '.[test,report]'
	touch $@

venv: $(BIN)/etchguard

proto: venv
	$(BIN)/python -m etchguard._protogen

serve: venv
	$(BIN)/etchguard serve --rules $(DECK) --workers $(WORKERS)

check: venv  # exit 1 (violations found) is an answer, not a failure of make
	$(BIN)/etchguard check --rules $(DECK) $(NETS); test $$? -le 1

test: venv  # the C++ example test needs Debian's gRPC + CMake, the page test Chromium
	[ "$${ETCHGUARD_SKIP_CPP:-}" = 1 ] || bash .ci/install-cpp-deps.sh
	bash .ci/install-chromium.sh || echo "make test: chromium not installed; the report page test will skip" >&2
	$(MAKE) lint
	$(BIN)/python -m pytest

# Style (ruff) and types (mypy) of the package, zero findings; the generated stubs in
# service/etchguard/v1 are left as protoc writes them (settings in pyproject.toml).
lint: venv
	$(BIN)/ruff check service/etchguard
	$(BIN)/mypy

bench: venv
	$(BIN)/python -m bench

clean:
	rm -rf $(VENV) build *.egg-info service/*.egg-info .pytest_cache

# The core's own tests (core/tests), built with AddressSanitizer and UBSan on their own
# (plain CMake, no Python) in build/sanitize, and run. `make test` runs them too
# (tests/test_core_native.py).
core-test:
	$(CMAKE) -S core -B build/sanitize -DETCHGUARD_SANITIZE=ON -DETCHGUARD_CORE_TESTS=ON
	$(CMAKE) --build build/sanitize --parallel 2
	UBSAN_OPTIONS=print_stacktrace=1 build/sanitize/etchguard_core_tests

# Build the C++ client example (client_examples/cpp) and run it against a server it starts.
.PHONY: cpp-example
cpp-example: venv
	bash .ci/install-cpp-deps.sh
	bash client_examples/cpp/run_example.sh

# Route the invented block blk_r twice, antenna-blind then antenna-aware, against an
# etchguard server on the demo deck that the demo starts and stops; prints the comparison.
.PHONY: demo
demo: venv
	$(BIN)/python client_examples/router/demo.py

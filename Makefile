# Everything a newcomer needs: `make serve` and `make test` set up their own venv.
PYTHON ?= python3
VENV   ?= .venv
BIN     = $(VENV)/bin
DECK   ?= service/etchguard/data/lumen-6m.toml
NETS   ?= service/etchguard/data/lumen-demo-nets.json

.PHONY: venv proto serve test check bench clean

$(BIN)/etchguard: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip
	$(BIN)/pip install --quiet -e '.[test,report]'
	touch $@

venv: $(BIN)/etchguard

proto: venv
	$(BIN)/python -m etchguard._protogen

serve: venv
	$(BIN)/etchguard serve --rules $(DECK)

check: venv  # exit 1 (violations found) is an answer, not a failure of make
	$(BIN)/etchguard check --rules $(DECK) $(NETS); test $$? -le 1

test: venv  # the C++ example test needs Debian's gRPC + CMake, the page test Chromium
	[ "$${ETCHGUARD_SKIP_CPP:-}" = 1 ] || bash .ci/install-cpp-deps.sh
	bash .ci/install-chromium.sh || echo "make test: chromium not installed; the report page test will skip" >&2
	$(BIN)/python -m pytest

bench: venv
	$(BIN)/python -m bench

clean:
	rm -rf $(VENV) build *.egg-info service/*.egg-info .pytest_cache

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

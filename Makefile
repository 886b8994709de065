# The two commands a newcomer runs: `make demo` and `make test`.
# Everything they need is installed here, into .venv, from the package registry.
PYTHON ?= python3
VENV ?= .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed

.PHONY: install demo test lint bench clean

# the example site plugin (DEVELOPERS.md) goes into the same venv, so the tests can run it through the CLI
EXAMPLE_PLUGIN := plugins/examples/valve_feedback
# setuptools announces every editable install with an information-only UserWarning ("be careful with
# folders ... with the same name as your package"); it is not a fault, so the build does not print it
QUIET_BUILD := PYTHONWARNINGS=ignore::UserWarning

$(STAMP): pyproject.toml $(EXAMPLE_PLUGIN)/pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(QUIET_BUILD) $(PY) -m pip install --quiet -e '.[dev]'
	$(QUIET_BUILD) $(PY) -m pip install --quiet --no-deps -e $(EXAMPLE_PLUGIN)
	touch $(STAMP)

install: $(STAMP)

demo: install
	@$(VENV)/bin/loopledger run sample_results --out build; rc=$$?; \
	 echo "loopledger exit code $$rc (0 = every test passed, 1 = a test failed, 2 = a file was invalid)"; \
	 test $$rc -le 1

lint: install
	$(VENV)/bin/ruff check pipeline plugins schemas tests benchmarks
	$(VENV)/bin/mypy

test: lint
	$(PY) -m pytest

# Invented fleets of 200 and 2,000 assets x 10 years under build/bench; takes a while (see README).
bench: install
	$(PY) benchmarks/run.py $(BENCH_ARGS)

clean:
	rm -rf build dist .pytest_cache .mypy_cache .ruff_cache

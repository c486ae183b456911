# Two commands do all set-up on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test test-slow bench clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[dev]'
	touch $(STAMP)

# The main job, on the sample project: proved, refuted, and a suggested precondition.
# pytest exits 1 because the sample has planted failures; the demo shows them.
demo: $(STAMP)
	cd sample_project && ../$(BIN)/python -m pytest -v -p no:cacheprovider --refines-report=../refines-report.json; \
	status=$$?; echo; echo "JSON report: refines-report.json"; \
	if [ $$status -eq 1 ]; then exit 0; else exit $$status; fi

test: $(STAMP)
	$(BIN)/python -m pytest -n 2 tests

# The expensive solver cases and the long semantic fuzzing run.
test-slow: $(STAMP)
	$(BIN)/python -m pytest -n 2 -m slow tests

bench: $(STAMP)
	$(BIN)/python tests/benchmarks/run_all.py

clean:
	rm -rf $(VENV) build *.egg-info plugin/*.egg-info refines-report.json

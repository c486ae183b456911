# Two commands do all set-up on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo demo-apply test test-slow bench clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[dev]'
	touch $(STAMP)

# The main job, on the sample project: proved, refuted, the exact and sufficient
# preconditions, the suggested assuming= and the diff that would apply it (nothing
# is written: --refines-diff). pytest exits 1 because the sample has planted
# failures; the demo shows them.
demo: $(STAMP)
	cd sample_project && ../$(BIN)/python -m pytest -v -p no:cacheprovider --refines-diff --refines-report=../refines-report.json; \
	status=$$?; echo; echo "JSON report: refines-report.json"; \
	echo "To apply the suggestions end to end (on a copy in build/demo-apply): make demo-apply"; \
	if [ $$status -eq 1 ]; then exit 0; else exit $$status; fi

# The suggestion workflow end to end, on a copy of the sample project in its own
# git repository (build/demo-apply; sample_project/ is never written): apply the
# suggestions for the three specs whose precondition was too weak, which checks the
# rewritten files again, then run pytest once more. The planted code bugs stay.
DEMO_COPY := build/demo-apply
DEMO_APPLY := lanes_needed or member_code or wear_gauge
demo-apply: $(STAMP)
	rm -rf $(DEMO_COPY) && mkdir -p build && cp -r sample_project $(DEMO_COPY)
	cd $(DEMO_COPY) && git init -q && git add -A && \
	git -c user.name=demo -c user.email=demo@example.invalid commit -q -m "sample project"
	cd $(DEMO_COPY) && ../../$(BIN)/python -m pytest -p no:cacheprovider -q --refines-apply -k "$(DEMO_APPLY)"; \
	status=$$?; if [ $$status -gt 1 ]; then exit $$status; fi
	@echo; echo "--- git diff --stat in $(DEMO_COPY), then pytest again:"
	cd $(DEMO_COPY) && git diff --stat
	cd $(DEMO_COPY) && ../../$(BIN)/python -m pytest -p no:cacheprovider -q; \
	status=$$?; if [ $$status -gt 1 ]; then exit $$status; fi

test: $(STAMP)
	$(BIN)/python -m pytest -n 2 tests

# The expensive solver cases and the long semantic fuzzing run.
test-slow: $(STAMP)
	$(BIN)/python -m pytest -n 2 -m slow tests

bench: $(STAMP)
	$(BIN)/python tests/benchmarks/run_all.py

clean:
	rm -rf $(VENV) build *.egg-info plugin/*.egg-info refines-report.json

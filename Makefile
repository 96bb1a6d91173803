# The two set-up commands of README.md: `make demo` and `make test`.
# Each builds .venv from nothing and installs against constraints.txt.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test lint bench constraints clean

$(STAMP): pyproject.toml constraints.txt
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -c constraints.txt -e '.[dev]'
	touch $(STAMP)

demo: $(STAMP)
	mkdir -p demo-out
	$(BIN)/testplan plan sample_campaign/flood-gauge-node.toml --chart demo-out/calendar.svg \
		--html demo-out/plan.html
	PATH="$(CURDIR)/$(BIN):$$PATH" sample_campaign/record_demo.sh demo-out

lint: $(STAMP)
	$(BIN)/ruff check testplan tests sample_campaign db bench
	$(BIN)/mypy

test: lint
	$(BIN)/python -m pytest -q

# Benchmarks (on demand; each prints testplan's time against a baseline run beside it).
bench: $(STAMP)
	@status=0; for b in startup import_sqlite import_large import_postgres judge manifest report; do \
		$(BIN)/python bench/$$b.py || status=1; done; exit $$status

# Regenerate constraints.txt from a venv that just passed `make test`.
constraints: $(STAMP)
	$(BIN)/python -m pip freeze --exclude-editable | grep -v '^-e ' > constraints.txt

clean:
	rm -rf $(VENV) demo-out .pytest_cache .mypy_cache .ruff_cache

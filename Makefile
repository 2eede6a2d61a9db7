PY ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: run test bench lint typecheck check format demo clean

# The pinned runtime and development tools, then this checkout itself as an editable
# package (so `engine` and `quietgrade` work from any folder).
$(STAMP): requirements.txt requirements-dev.txt pyproject.toml setup.py
	test -d $(VENV) || $(PY) -m venv $(VENV)
	$(BIN)/pip install -q --disable-pip-version-check -r requirements-dev.txt
	$(BIN)/pip install -q --disable-pip-version-check --no-deps -e .
	touch $(STAMP)

# `make run PORT=8600` serves the dashboard on another port. One allocator arena for the
# server (engine.base.memory: a large library reranks faster and keeps less memory).
PORT ?= 8501

run: $(STAMP)
	$(BIN)/quietgrade demo
	MALLOC_ARENA_MAX=$${MALLOC_ARENA_MAX:-1} $(BIN)/streamlit run dashboard/app.py --server.address 127.0.0.1 --server.port $(PORT) \
		--server.headless true --browser.gatherUsageStats false

test: $(STAMP)
	$(BIN)/python -m pytest -q

bench: $(STAMP)
	$(BIN)/python -m bench.run_all

SOURCES := engine dashboard tests demo_materials bench setup.py

lint: $(STAMP)
	$(BIN)/ruff check $(SOURCES)
	$(BIN)/ruff format --check $(SOURCES)

typecheck: $(STAMP)
	$(BIN)/mypy

# What CI runs before the tests.
check: lint typecheck

format: $(STAMP)
	$(BIN)/ruff format $(SOURCES)
	$(BIN)/ruff check --fix $(SOURCES)

clean:
	rm -rf $(VENV) .pytest_cache .ruff_cache

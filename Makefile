PY ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: run test bench lint format demo clean

$(STAMP): requirements.txt
	test -d $(VENV) || $(PY) -m venv $(VENV)
	$(BIN)/pip install -q --disable-pip-version-check -r requirements.txt
	touch $(STAMP)

run: $(STAMP)
	$(BIN)/python -m engine demo
	$(BIN)/streamlit run dashboard/app.py --server.address 127.0.0.1 --server.port 8501 \
		--server.headless true --browser.gatherUsageStats false

test: $(STAMP)
	$(BIN)/python -m pytest -q

bench: $(STAMP)
	$(BIN)/python -m bench.run_all

lint: $(STAMP)
	$(BIN)/ruff check engine dashboard tests demo_materials bench
	$(BIN)/ruff format --check engine dashboard tests demo_materials bench

format: $(STAMP)
	$(BIN)/ruff format engine dashboard tests demo_materials bench
	$(BIN)/ruff check --fix engine dashboard tests demo_materials bench

clean:
	rm -rf $(VENV) .pytest_cache .ruff_cache

PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test bench clean samples lint

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip
	$(BIN)/pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/sectio study sample_images/demo_study.toml --out demo_out
	@echo "Report: demo_out/report.html (and report.pdf); per-specimen JSON in demo_out/<specimen>/"

test: $(STAMP)
	$(BIN)/python -m pytest

lint: $(STAMP)
	$(BIN)/ruff check src tests benchmarks
	$(BIN)/mypy

samples: $(STAMP)
	$(BIN)/python sample_images/make_samples.py

bench: $(STAMP)
	$(BIN)/python benchmarks/bench_grains.py
	$(BIN)/python benchmarks/bench_particles.py
	$(BIN)/python benchmarks/bench_strength.py
	$(BIN)/python benchmarks/bench_study.py
	$(BIN)/python benchmarks/bench_fuzz.py
	$(BIN)/python benchmarks/bench_kills.py

clean:
	rm -rf $(VENV) demo_out build *.egg-info src/*.egg-info

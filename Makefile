PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test bench clean samples

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip
	$(BIN)/pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/sectio grains sample_images/*.tif --out demo_out
	@echo "Results in demo_out/ (grains.json, grains.csv, overlays)."

test: $(STAMP)
	$(BIN)/python -m pytest

samples: $(STAMP)
	$(BIN)/python sample_images/make_samples.py

bench: $(STAMP)
	$(BIN)/python benchmarks/bench_grains.py

clean:
	rm -rf $(VENV) demo_out build *.egg-info src/*.egg-info

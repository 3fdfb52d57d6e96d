"""Shared fixtures: the published schemas and the UD treebanks in ../shared (never vendored)."""

from __future__ import annotations

import os
from pathlib import Path

import pytest

PROJECT_ROOT = Path(__file__).resolve().parent.parent
SHARED = Path(os.environ.get("LEXBUILD_SHARED", PROJECT_ROOT.parent / "shared"))
SCHEMAS = SHARED / "schemas"
UD = SHARED / "corpora" / "ud"
SAMPLE_LEXICON = PROJECT_ROOT / "sample_lexicon"


@pytest.fixture(scope="session")
def schemas_dir() -> Path:
    assert (SCHEMAS / "TEILex0.rng").is_file(), f"published schemas expected in {SCHEMAS}"
    return SCHEMAS


@pytest.fixture(scope="session")
def ud_dir() -> Path:
    assert UD.is_dir(), f"UD treebanks expected in {UD}"
    return UD


@pytest.fixture(scope="session")
def sample_lexicon_dir() -> Path:
    return SAMPLE_LEXICON

"""Property: whatever the mutation of a real file, every reader either accepts it or ends in one
LexbuildError naming the file; never another exception, never past the time limit.

The inputs come from ``benchmarks/fuzz_readers.py`` (the same mutations: truncation, byte flips,
line duplication, deep nesting, huge numbers, encodings, format tokens), drawn here by hypothesis
a few dozen times per reader so that CI stays fast; the script runs 10,000 per reader.
"""

from __future__ import annotations

import random
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from benchmarks.fuzz_readers import Reader, build_readers, mutate, outcome, prepare

READER_NAMES = [
    "conllu",
    "conllu-gz",
    "conllu-xz",
    "yaml-entry",
    "yaml-metadata",
    "tei-diff",
    "tei-read",
    "induction-json",
    "induction-assignments",
    "calibration",
    "gold-tsv",
    "gold-conllu",
    "lmf-validate",
]


@pytest.fixture(scope="module")
def readers(ud_dir: Path, schemas_dir: Path) -> dict[str, Reader]:
    return build_readers(ud_dir, schemas_dir)


def test_every_reader_is_fuzzed(readers: dict[str, Reader]) -> None:
    assert sorted(readers) == sorted(READER_NAMES)


def test_the_original_files_are_accepted(readers: dict[str, Reader], tmp_path: Path) -> None:
    # The control: unmutated real files read cleanly, so an error below comes from the mutation.
    for reader in readers.values():
        prepare(
            reader,
            tmp_path / reader.name,
            reader.compress(reader.original) if reader.compress else reader.original,
        )
        assert outcome(reader, tmp_path / reader.name, 30.0) == ("accepted", ""), reader.name


@pytest.mark.parametrize("name", READER_NAMES)
@settings(
    max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(random_state=st.integers(0, 2**32 - 1))
def test_mutated_input_is_accepted_or_one_clean_error(
    readers: dict[str, Reader], tmp_path: Path, name: str, random_state: int
) -> None:
    reader = readers[name]
    data, mutations = mutate(reader, random.Random(random_state))
    prepare(reader, tmp_path / name, data)
    kind, detail = outcome(reader, tmp_path / name, 20.0)
    assert kind in ("clean", "accepted"), f"{'+'.join(mutations)}: {detail}"

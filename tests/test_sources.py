"""YAML sources: locations, round-trip editing, clear errors, and the JSON Schema on disk."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import jsonschema
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from ruamel.yaml import YAML

from lexbuild.cli import main
from lexbuild.errors import SourceError
from lexbuild.lexicon.model import Status
from lexbuild.lexicon.sources import (
    ENTRY_SCHEMA_FILE,
    LEXICON_SCHEMA_FILE,
    entry_json_schema,
    lexicon_json_schema,
    load_lexicon,
    schema_text,
    write_entry,
    write_meta,
)
from tests.conftest import PROJECT_ROOT

SCHEMAS = PROJECT_ROOT / "schemas"


@pytest.fixture
def sources(tmp_path: Path, sample_lexicon_dir: Path) -> Path:
    copy = tmp_path / "sources"
    shutil.copytree(sample_lexicon_dir, copy)
    return copy


def _line_of(path: Path, needle: str) -> int:
    lines = path.read_text(encoding="utf-8").splitlines()
    return next(number for number, line in enumerate(lines, start=1) if needle in line)


def test_sample_loads_with_locations(sample_lexicon_dir: Path) -> None:
    loaded = load_lexicon(sample_lexicon_dir)
    assert 15 <= len(loaded.lexicon.entries) <= 25
    tenir = sample_lexicon_dir / "entries" / "tenir.yaml"
    location = loaded.source_map.locate("tenir", ("senses", 1, "gloss"))
    assert location.file == str(tenir)
    assert location.line == _line_of(tenir, "« tenir à »")
    assert location.column == len("    gloss: ") + 1
    assert loaded.source_map.locate_id("tenir.s2.x1").line == _line_of(tenir, "id: tenir.s2.x1")
    # A value that was not written (a default) is located at its nearest written ancestor.
    assert loaded.source_map.locate("tenir", ("senses", 0, "note")).line == _line_of(
        tenir, "- id: tenir.s1"
    )


def test_unchanged_write_is_byte_identical(sources: Path, sample_lexicon_dir: Path) -> None:
    loaded = load_lexicon(sources)
    for entry in loaded.lexicon.entries:
        write_entry(sources, entry)
    write_meta(sources, loaded.lexicon.meta)
    for original in sorted(sample_lexicon_dir.rglob("*.yaml")):
        written = sources / original.relative_to(sample_lexicon_dir)
        assert written.read_bytes() == original.read_bytes(), original.name


def test_edit_keeps_comments_and_key_order(sources: Path) -> None:
    path = sources / "entries" / "tenir.yaml"
    before = path.read_text(encoding="utf-8")
    assert before.startswith("# tenir")
    loaded = load_lexicon(sources)
    entry = loaded.lexicon.entry("tenir")
    assert entry is not None
    sense = entry.senses[2].model_copy(update={"gloss": "avoir lieu", "status": Status.APPROVED})
    entry = entry.model_copy(update={"senses": [*entry.senses[:2], sense, *entry.senses[3:]]})
    write_entry(sources, entry)
    after = path.read_text(encoding="utf-8")
    assert after.startswith(before.splitlines()[0])  # the editor's comment survives
    # The editor's quoting style of the replaced value is kept.
    assert 'gloss: "avoir lieu"' in after and "status: approved" in after
    changed = [
        (old, new)
        for old, new in zip(before.splitlines(), after.splitlines(), strict=True)
        if old != new
    ]
    assert len(changed) == 2  # exactly the two edited lines, nothing reflowed or reordered
    reloaded = load_lexicon(sources).lexicon.entry("tenir")
    assert reloaded == entry


@pytest.mark.parametrize(
    ("text", "line", "message"),
    [
        ("id: porter\nlemma: porter\nsenses: [\n", 4, "invalid YAML"),
        ("id: porter\nlemma: porter\ncolour: blue\n", 3, "unknown field 'colour'"),
        ("id: porter\nsenses: []\n", 1, "lemma: required field is missing"),
        (
            "id: porter\nlemma: porter\nsenses:\n  - id: porter.s1\n    status: finished\n",
            5,
            "status 'finished' is not one of",
        ),
        (
            "id: porter\nlemma: porter\nsenses:\n  - id: porter.s1\n    frames:\n"
            "      - pattern: subj:NP obj:XP\n",
            6,
            "unknown realisation 'XP'",
        ),
        ("id: emporter\nlemma: porter\n", 1, "does not match the file name"),
    ],
)
def test_bad_entry_names_file_and_line(sources: Path, text: str, line: int, message: str) -> None:
    path = sources / "entries" / "porter.yaml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(SourceError) as raised:
        load_lexicon(sources)
    assert raised.value.location is not None
    assert raised.value.location.file == str(path)
    assert raised.value.location.line == line
    assert message in str(raised.value)


def test_unknown_field_lists_the_allowed_ones(sources: Path) -> None:
    path = sources / "entries" / "porter.yaml"
    path.write_text("id: porter\nlemma: porter\nsenses:\n  - id: porter.s1\n    glose: x\n")
    with pytest.raises(SourceError, match="allowed fields here: id, gloss, status"):
        load_lexicon(sources)


def test_non_utf8_names_the_line(sources: Path) -> None:
    path = sources / "entries" / "porter.yaml"
    path.write_bytes(b"id: porter\nlemma: porter\n# caf\xe9\n")
    with pytest.raises(SourceError, match="not UTF-8") as raised:
        load_lexicon(sources)
    assert raised.value.location is not None and raised.value.location.line == 3


def test_failed_load_changes_nothing(sources: Path) -> None:
    before = {p: p.read_bytes() for p in sources.rglob("*.yaml")}
    (sources / "entries" / "zz.yaml").write_text("id: [\n")
    assert main(["check", str(sources)]) == 1  # reported as an E000 finding
    assert {p: p.read_bytes() for p in before} == before


def test_json_schema_files_match_the_model() -> None:
    # Regenerate with `lexbuild schema --output schemas` when this fails.
    assert (SCHEMAS / ENTRY_SCHEMA_FILE).read_text(encoding="utf-8") == schema_text(
        entry_json_schema()
    )
    assert (SCHEMAS / LEXICON_SCHEMA_FILE).read_text(encoding="utf-8") == schema_text(
        lexicon_json_schema()
    )


def test_sample_files_validate_against_the_json_schema(sample_lexicon_dir: Path) -> None:
    # Reference implementation: the `jsonschema` package (JSON Schema draft 2020-12).
    yaml = YAML(typ="safe")
    entry_validator = jsonschema.Draft202012Validator(
        json.loads((SCHEMAS / ENTRY_SCHEMA_FILE).read_text(encoding="utf-8"))
    )
    for path in sorted((sample_lexicon_dir / "entries").glob("*.yaml")):
        entry_validator.validate(json.loads(json.dumps(yaml.load(path))))
    meta = yaml.load(sample_lexicon_dir / "lexicon.yaml")
    meta["release_date"] = meta["release_date"].isoformat()
    jsonschema.Draft202012Validator(
        json.loads((SCHEMAS / LEXICON_SCHEMA_FILE).read_text(encoding="utf-8"))
    ).validate(meta)


def test_json_schema_rejects_what_the_model_rejects() -> None:
    validator = jsonschema.Draft202012Validator(entry_json_schema())
    assert not validator.is_valid({"id": "porter", "lemma": "porter", "colour": "blue"})
    assert not validator.is_valid({"id": "porter"})
    assert validator.is_valid({"id": "porter", "lemma": "porter", "senses": []})


def test_schema_command_writes_both_files(tmp_path: Path) -> None:
    assert main(["schema", "--output", str(tmp_path)]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(
        [ENTRY_SCHEMA_FILE, LEXICON_SCHEMA_FILE]
    )


def test_parallel_loading_gives_the_same_lexicon(
    sample_lexicon_dir: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    serial = load_lexicon(sample_lexicon_dir)
    monkeypatch.setattr("lexbuild.lexicon.sources.PARALLEL_FILES", 2)
    parallel = load_lexicon(sample_lexicon_dir)
    assert parallel.lexicon == serial.lexicon
    assert parallel.source_map.locate_id("tenir.s2.x1") == serial.source_map.locate_id(
        "tenir.s2.x1"
    )


TRICKY_SCALARS = [
    "no", "yes", "on", "off", "y", "n", "true", "False", "TRUE", "null", "~", "Null", "",
    "010", "0o17", "0x1F", "1_000", "1:20", "+12", "-7", "0", "3.5", ".5", "1e3", "1.5E-2",
    ".inf", "-.Inf", ".nan", "2026-12-01", "2026-12-01 10:00:00", "0b101", "-0x_1f", "1__0",
    "12e", "'010'",
    '"no"', "à cause de", "subj:NP obj:NP", "[1, 2]", "{a: 1}",
]


@pytest.mark.parametrize("scalar", TRICKY_SCALARS)
def test_fast_loader_reads_what_ruamel_reads(scalar: str) -> None:
    # Reference: ruamel.yaml's round-trip loader (YAML 1.2). The fast libyaml path must give
    # the same Python values, or the same entries would load differently by path.
    from lexbuild.lexicon.sources import _fast_load, _guarded_load, _plain, _yaml

    text = f"value: {scalar}\n"
    expected = _plain(_yaml().load(text))
    # the one-pass path (values built from the guard's events) must read the same too
    for got in (_fast_load(text), _guarded_load(text, "<test>")):
        assert type(got["value"]) is type(expected["value"])
        if scalar == ".nan":
            assert got["value"] != got["value"] and expected["value"] != expected["value"]
        else:
            assert got == expected


def test_fast_loader_agrees_on_every_shipped_yaml_file(sample_lexicon_dir: Path) -> None:
    from lexbuild.lexicon.sources import _fast_load, _guarded_load, _plain, _yaml

    files = [
        *sorted(sample_lexicon_dir.rglob("*.yaml")),
        *sorted((PROJECT_ROOT / "tests" / "fixtures").rglob("*.yaml")),
    ]
    assert len(files) > 30
    for path in files:
        text = path.read_text(encoding="utf-8")
        try:
            expected = _plain(_yaml().load(text))
        except Exception:
            continue  # fixtures that are broken on purpose
        assert _fast_load(text) == expected, path
        try:
            one_pass = _guarded_load(text, str(path))
        except SourceError:
            continue  # refused by the guard on purpose (tests/test_sources_limits.py)
        assert one_pass == expected, path
        assert _types(one_pass) == _types(expected), path


def _types(value: object) -> object:
    """The value's shape with every scalar replaced by its type: 1 == True, 1.0 == 1."""
    if isinstance(value, dict):
        return {key: _types(item) for key, item in value.items()}
    if isinstance(value, list):
        return [_types(item) for item in value]
    return type(value)


_YAML_SCALARS = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(min_value=-(10**12), max_value=10**12),
    st.floats(allow_nan=False, width=32),
    st.text(st.characters(codec="utf-8", exclude_categories=("Cs", "Cc")), max_size=12),
    st.sampled_from(TRICKY_SCALARS),
)
_YAML_DOCUMENTS = st.recursive(
    _YAML_SCALARS,
    lambda inner: st.lists(inner, max_size=4)
    | st.dictionaries(st.text("abcdéxyz_ 0123456789:-", min_size=1, max_size=8), inner, max_size=4),
    max_leaves=20,
)


@settings(max_examples=150, deadline=None)
@given(document=_YAML_DOCUMENTS)
def test_one_pass_load_equals_the_libyaml_loader(document: object) -> None:
    # Reference: PyYAML's libyaml loader with the core schema (_fast_load), itself checked
    # against ruamel above. Text written by ruamel's dumper, as an editor's file would be.
    from lexbuild.lexicon.sources import _dump, _fast_load, _guarded_load

    text = _dump({"value": document})
    expected = _fast_load(text)
    got = _guarded_load(text, "<random>")
    assert got == expected
    assert _types(got) == _types(expected)

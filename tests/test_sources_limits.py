"""YAML sources refuse what would be lost or dangerous: duplicate keys, tags, merge keys,
anchors and aliases, deep nesting, huge numbers; every case ends in one SourceError with
file, line and column, and the CLI exits 2 (never a traceback, never a hang)."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lexbuild.cli import main
from lexbuild.errors import SourceError
from lexbuild.lexicon.sources import MAX_YAML_DEPTH, load_entry, load_lexicon


@pytest.fixture
def sources(tmp_path: Path, sample_lexicon_dir: Path) -> Path:
    copy = tmp_path / "sources"
    shutil.copytree(sample_lexicon_dir, copy)
    return copy


def _append(path: Path, text: str) -> int:
    """Append ``text`` and return the 1-based line its first line lands on."""
    old = path.read_text(encoding="utf-8")
    path.write_text(old + text, encoding="utf-8")
    return old.count("\n") + 1


def _error(folder: Path) -> SourceError:
    with pytest.raises(SourceError) as caught:
        load_lexicon(folder)
    return caught.value


def test_duplicate_key_in_an_entry_names_both_lines(sources: Path) -> None:
    # The YAML 1.2 spec (section 3.2.1.1) requires mapping keys to be unique; a loader that
    # keeps the last value loses a curated note without a word.
    entry = sources / "entries" / "agir.yaml"
    text = entry.read_text(encoding="utf-8")
    first = text.splitlines().index("lemma: agir") + 1
    line = _append(entry, "lemma: agir\n")
    error = _error(sources)
    assert error.location is not None
    assert (error.location.file, error.location.line) == (str(entry), line)
    assert f"first at line {first}" in error.message and f"again at line {line}" in error.message


def test_duplicate_key_in_metadata_is_an_error(sources: Path) -> None:
    line = _append(sources / "lexicon.yaml", "licence: CC0-1.0\n")
    error = _error(sources)
    assert error.location is not None and error.location.line == line
    assert "duplicate key 'licence'" in error.message


def test_duplicate_key_nested_in_a_sense(sources: Path) -> None:
    entry = sources / "entries" / "agir.yaml"
    text = entry.read_text(encoding="utf-8")
    entry.write_text(
        text.replace(
            "    gloss: faire quelque chose, intervenir\n",
            "    gloss: faire quelque chose, intervenir\n    gloss: autre\n",
            1,
        ),
        encoding="utf-8",
    )
    with pytest.raises(SourceError, match="duplicate key 'gloss'"):
        load_entry(entry)


def test_python_tag_is_refused_not_run(sources: Path, tmp_path: Path) -> None:
    marker = tmp_path / "ran"
    _append(sources / "lexicon.yaml", f"x: !!python/object/apply:os.system ['touch {marker}']\n")
    assert "YAML tag" in _error(sources).message
    assert not marker.exists()


def test_merge_key_is_refused(sources: Path) -> None:
    line = _append(sources / "lexicon.yaml", "x:\n  <<: {a: 1}\n")
    error = _error(sources)
    assert "merge keys" in error.message
    assert error.location is not None and error.location.line == line + 1


def test_alias_bomb_is_refused_quickly(sources: Path) -> None:
    # The "billion laughs" shape in YAML: 9 levels of 9 aliases each.
    lines = ["bomb0: &a0 [x, x, x, x, x, x, x, x, x]"]
    for level in range(1, 10):
        lines.append(f"bomb{level}: &a{level} [" + ", ".join([f"*a{level - 1}"] * 9) + "]")
    _append(sources / "entries" / "agir.yaml", "\n".join(lines) + "\n")
    problems: list[SourceError] = []
    load_lexicon(sources, problems=problems)
    assert len(problems) == 1 and "anchors and aliases" in problems[0].message


def test_deep_nesting_is_refused(sources: Path) -> None:
    _append(sources / "lexicon.yaml", "deep: " + "[" * 5000 + "]" * 5000 + "\n")
    error = _error(sources)
    assert error.location is not None and error.location.line > 0


def test_nesting_limit_is_ours_below_the_parser_limit(sources: Path) -> None:
    depth = MAX_YAML_DEPTH + 1
    _append(sources / "lexicon.yaml", "deep: " + "[" * depth + "]" * depth + "\n")
    assert f"deeper than {MAX_YAML_DEPTH}" in _error(sources).message


def test_huge_integer_is_refused(sources: Path) -> None:
    meta = sources / "lexicon.yaml"
    text = meta.read_text(encoding="utf-8").replace("edition: 1\n", "")
    meta.write_text(text, encoding="utf-8")
    line = _append(meta, "edition: " + "9" * 5000 + "\n")
    error = _error(sources)
    assert error.location is not None and error.location.line == line
    assert "number of 5000 characters" in error.message


def test_two_documents_are_refused(sources: Path) -> None:
    _append(sources / "entries" / "agir.yaml", "---\nid: agir\n")
    with pytest.raises(SourceError, match="more than one YAML document"):
        load_entry(sources / "entries" / "agir.yaml")


def test_cli_exits_2_with_location(sources: Path, capsys: pytest.CaptureFixture[str]) -> None:
    line = _append(sources / "lexicon.yaml", "licence: CC0-1.0\n")
    # check and export agree: the same file is an error for both, with the same location.
    for argv in (
        ["check", str(sources)],
        ["export", str(sources), "--format", "tei", "--output", str(sources / "o.xml")],
    ):
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert f"lexicon.yaml:{line}:1" in err and "Traceback" not in err


@settings(
    max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(data=st.data())
def test_mutated_entry_loads_or_fails_cleanly(
    data: st.DataObject, sample_lexicon_dir: Path, tmp_path_factory: pytest.TempPathFactory
) -> None:
    raw = (sample_lexicon_dir / "entries" / "agir.yaml").read_bytes()
    cut = data.draw(st.integers(0, len(raw)))
    noise = data.draw(st.binary(max_size=12))
    at = data.draw(st.integers(0, cut))
    mutated = raw[:at] + noise + raw[at:cut]
    path = tmp_path_factory.mktemp("fuzz") / "agir.yaml"
    path.write_bytes(mutated)
    try:
        load_entry(path)
    except SourceError as error:
        assert error.location is not None and error.location.file == str(path)


@pytest.mark.parametrize(
    ("text", "words"),
    [
        ("a: 1\na: 2\n", "duplicate key 'a'"),
        ("a: !!str 1\n", "YAML tag"),
        ("a: &x 1\nb: *x\n", "anchors and aliases"),
        ("a:\n  <<: {b: 1}\n", "merge keys"),
        ("a: " + "[" * 100 + "]" * 100 + "\n", "deeper than"),
        ("a: [\n", "invalid YAML"),
    ],
)
def test_guard_without_libyaml(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, text: str, words: str
) -> None:
    # Where PyYAML has no libyaml, the guard reads ruamel's pure-Python event stream instead.
    from lexbuild.lexicon import sources as module

    monkeypatch.setattr(module, "_libyaml_loader", lambda: None)
    path = tmp_path / "x.yaml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(SourceError, match=words) as caught:
        module._guard_yaml(text, str(path))
    assert caught.value.location is not None and caught.value.location.line >= 1

"""Consistency rules: one fixture per code, each marking the line its finding must name."""

from __future__ import annotations

import json
import re
import shutil
from pathlib import Path

import pytest
from lxml import etree

from lexbuild.cli import main
from lexbuild.errors import SourceError
from lexbuild.formats.xmlsafe import forbidden_character
from lexbuild.lexicon.checks import (
    RULES,
    Severity,
    check_lexicon,
    findings_json,
    load_problem_findings,
    looks_like_form,
)
from lexbuild.lexicon.sources import load_lexicon

FIXTURES = Path(__file__).parent / "fixtures" / "checks"
MARK = re.compile(r"#\s*<-\s*(?P<code>[EW]\d{3})")


def _expected(path: Path) -> tuple[str, int]:
    for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
        match = MARK.search(line)
        if match:
            return match.group("code"), number
    raise AssertionError(f"{path} marks no line with '# <- CODE'")


def _sources_with(tmp_path: Path, fixture: Path) -> Path:
    root = tmp_path / "sources"
    (root / "entries").mkdir(parents=True)
    shutil.copy(FIXTURES / "lexicon.yaml", root / "lexicon.yaml")
    shutil.copy(fixture, root / "entries" / fixture.name)
    return root


FIXTURE_FILES = sorted((FIXTURES / "entries").glob("*.yaml"))


def test_every_rule_has_a_fixture() -> None:
    covered = {_expected(path)[0] for path in FIXTURE_FILES}
    # E110 checks lexicon.yaml, not an entry: test_duplicate_editor_and_corpus_ids_... covers it.
    assert set(RULES) | {"E000"} == covered | {"E110"}


@pytest.mark.parametrize("fixture", FIXTURE_FILES, ids=lambda path: path.stem)
def test_fixture_triggers_its_code_on_the_marked_line(tmp_path: Path, fixture: Path) -> None:
    code, line = _expected(fixture)
    root = _sources_with(tmp_path, fixture)
    problems: list[SourceError] = []
    loaded = load_lexicon(root, problems=problems)
    findings = load_problem_findings(problems) + check_lexicon(loaded)
    assert [(f.code, f.location.line) for f in findings] == [(code, line)], [
        str(f) for f in findings
    ]
    (finding,) = findings
    assert finding.location.file.endswith(f"entries/{fixture.name}")
    assert finding.location.column > 0
    assert finding.hint
    if code != "E000":
        assert finding.entry == fixture.stem


def test_cli_exit_codes_and_json(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    error_root = _sources_with(tmp_path / "a", FIXTURES / "entries" / "e102.yaml")
    assert main(["check", str(error_root), "--format", "json"]) == 1
    report = json.loads(capsys.readouterr().out)
    assert report["errors"] == 1
    assert report["findings"][0]["code"] == "E102"
    assert report["findings"][0]["field"] == "senses[0]"
    assert report["findings"][0]["line"] == 5

    warning_root = _sources_with(tmp_path / "b", FIXTURES / "entries" / "w402.yaml")
    assert main(["check", str(warning_root)]) == 0
    assert main(["check", str(warning_root), "--strict"]) == 1
    assert main(["check", str(warning_root), "--ignore", "W4", "--strict"]) == 0
    assert main(["check", str(tmp_path / "missing")]) == 2
    assert "sources folder not found" in capsys.readouterr().err
    assert main(["check", str(warning_root), "--select", "Z9"]) == 2


def test_sample_lexicon_is_clean(sample_lexicon_dir: Path) -> None:
    findings = check_lexicon(load_lexicon(sample_lexicon_dir))
    assert findings == [], [str(f) for f in findings]


def test_codes_say_their_severity_and_json_keeps_every_field() -> None:
    # Codes are grouped as documented in lexbuild.lexicon.checks: E... errors, W... warnings.
    for code, rule in RULES.items():
        assert rule.severity is (Severity.ERROR if code.startswith("E") else Severity.WARNING)
    problems: list[SourceError] = []
    loaded = load_lexicon(FIXTURES, problems=problems)  # every fixture at once
    findings = load_problem_findings(problems) + check_lexicon(loaded)
    document = json.loads(findings_json(findings))
    assert document["findings"] == [finding.as_dict() for finding in findings]
    assert document["errors"] == sum(1 for f in findings if f.code.startswith("E"))
    assert document["warnings"] == sum(1 for f in findings if f.code.startswith("W"))
    # E110 (lexicon.yaml) is covered by its own test below.
    assert {f["code"] for f in document["findings"]} == (set(RULES) - {"E110"}) | {"E000"}


def _lxml_accepts(char: str) -> bool:
    element = etree.Element("t")
    try:
        element.text = f"a{char}b"
    except ValueError:
        return False
    return True


def test_forbidden_characters_agree_with_lxml() -> None:
    # Reference: libxml2 (through lxml) refuses text outside XML 1.0 'Char' (XML 1.0 section 2.2).
    # We also refuse the C1 controls U+0080-U+009F, which that section discourages.
    c1 = {chr(code) for code in range(0x80, 0xA0)}
    for code in [*range(0x0, 0xD800), *range(0xE000, 0x10000)]:
        char = chr(code)
        flagged = forbidden_character(f"a{char}b", discouraged=True) is not None
        if char in c1 or char == "\x7f":
            assert flagged, hex(code)
        else:
            assert flagged == (not _lxml_accepts(char)), hex(code)


@pytest.mark.parametrize(
    ("form", "lemma"),
    [
        # French and English conjugation, from memory of the standard tables.
        ("tient", "tenir"),
        ("pris", "prendre"),
        ("doit", "devoir"),
        ("va", "aller"),
        ("est", "être"),
        ("rend", "se rendre compte"),
        ("allés", "s'en aller"),
        ("went", "go"),
    ],
)
def test_forms_of_the_lemma_are_recognised(form: str, lemma: str) -> None:
    assert looks_like_form(form, lemma)


@pytest.mark.parametrize(("form", "lemma"), [("facteur", "porter"), ("sont", "tenir")])
def test_other_words_are_not_forms(form: str, lemma: str) -> None:
    assert not looks_like_form(form, lemma)


def test_duplicate_editor_and_corpus_ids_are_reported_with_both_lines(
    tmp_path: Path, sample_lexicon_dir: Path
) -> None:
    # Found by a hostile-input run: these passed check and then failed export without a
    # location (TEI xml:id values must be unique, XML 1.0 + xml:id 1.0).
    import shutil

    from lexbuild.lexicon.checks import check_lexicon as run_checks
    from lexbuild.lexicon.sources import load_lexicon as load

    folder = tmp_path / "sources"
    shutil.copytree(sample_lexicon_dir, folder)
    meta = folder / "lexicon.yaml"
    text = meta.read_text(encoding="utf-8")
    text = text.replace(
        "  - {id: ed.le-gall, name: Tristan Le Gall}\n",
        "  - {id: ed.le-gall, name: Tristan Le Gall}\n  - {id: ed.morvan, name: A. Morvan}\n",
    ).replace(
        "  - {id: brevenn, title: Gazette de Brévenn (corpus de démonstration)}\n",
        "  - {id: brevenn, title: Gazette de Brévenn (corpus de démonstration)}\n"
        "  - {id: brevenn, title: Autre}\n",
    )
    meta.write_text(text, encoding="utf-8")
    lines = text.splitlines()
    editor_lines = [n for n, line in enumerate(lines, 1) if "id: ed.morvan" in line]
    corpus_lines = [n for n, line in enumerate(lines, 1) if "{id: brevenn" in line]
    findings = [f for f in run_checks(load(folder)) if f.code == "E110"]
    assert sorted((f.field, f.location.line) for f in findings) == sorted(
        [("editors[2].id", editor_lines[1]), ("corpora[1].id", corpus_lines[1])]
    )
    assert f"(line {editor_lines[0]})" in next(f.message for f in findings if "editors" in f.field)
    assert f"(line {corpus_lines[0]})" in next(f.message for f in findings if "corpora" in f.field)

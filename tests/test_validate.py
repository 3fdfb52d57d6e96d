"""Validation against the published schemas (../shared/schemas), extra project schemas, and
tracing of every problem back to the XML line, the nearest id and the YAML source line."""

from __future__ import annotations

import json
import re
import shutil
from pathlib import Path

import pytest
from lxml import etree

from lexbuild.errors import SchemaError, ValidationFailed
from lexbuild.formats import schemastore
from lexbuild.formats import validate as validate_module
from lexbuild.formats.lmf import is_lmf, to_lmf
from lexbuild.formats.tei import is_tei, to_tei
from lexbuild.formats.validate import (
    XmlFinding,
    detect_format,
    findings_json,
    validate_bytes,
    validate_file,
)
from lexbuild.formats.xmlsafe import parse_untrusted
from lexbuild.lexicon.model import ExtraSchema
from lexbuild.lexicon.sources import LoadedLexicon, load_lexicon

FIXTURES = Path(__file__).parent / "fixtures" / "xml"


@pytest.fixture(scope="module")
def loaded(sample_lexicon_dir: Path) -> LoadedLexicon:
    return load_lexicon(sample_lexicon_dir)


@pytest.fixture(scope="module")
def tei_bytes(loaded: LoadedLexicon) -> bytes:
    return to_tei(loaded.lexicon)


@pytest.fixture(scope="module")
def lmf_bytes(loaded: LoadedLexicon) -> bytes:
    return to_lmf(loaded.lexicon)


def yaml_line(path: Path, needle: str) -> int:
    """1-based line of the first line of ``path`` that contains ``needle`` (read here, directly)."""
    for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
        if needle in line:
            return number
    raise AssertionError(f"{needle!r} not in {path}")


def xml_line(data: bytes, needle: bytes) -> int:
    return data[: data.index(needle)].count(b"\n") + 1


# ----------------------------------------------------------------------------- published schemas


def test_formats_are_recognised(tei_bytes: bytes, lmf_bytes: bytes) -> None:
    assert detect_format(tei_bytes) == "tei"
    assert detect_format(lmf_bytes) == "lmf"
    assert is_tei(tei_bytes) and not is_tei(lmf_bytes) and not is_tei(b"junk")
    assert is_lmf(lmf_bytes) and not is_lmf(tei_bytes)
    with pytest.raises(ValidationFailed, match="neither TEI"):
        detect_format(b"<html/>")
    with pytest.raises(ValidationFailed, match="well-formed"):
        detect_format(b"plain text, no markup")


def test_sample_exports_are_valid(
    tei_bytes: bytes, lmf_bytes: bytes, schemas_dir: Path, tmp_path: Path
) -> None:
    # TEI Lex-0 RelaxNG + Schematron and LMF DTD rev. 16, ../shared/schemas
    assert validate_bytes(tei_bytes, schemas_dir=schemas_dir) == []
    assert validate_bytes(lmf_bytes, schemas_dir=schemas_dir) == []
    path = tmp_path / "sample.tei.xml"
    path.write_bytes(tei_bytes)
    assert validate_file(path, schemas_dir=schemas_dir) == []


def test_schema_folder_search_order(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, schemas_dir: Path
) -> None:
    monkeypatch.delenv("LEXBUILD_SCHEMAS", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    assert schemastore.schemas_dir() == tmp_path / "cache" / "lexbuild" / "schemas"
    monkeypatch.setenv("LEXBUILD_SCHEMAS", str(schemas_dir))
    assert schemastore.schemas_dir() == schemas_dir
    assert schemastore.schemas_dir(tmp_path) == tmp_path


@pytest.mark.parametrize("name", sorted(schemastore.PINNED))
def test_altered_schema_is_refused_with_where_to_get_it(
    name: str, schemas_dir: Path, tmp_path: Path, tei_bytes: bytes
) -> None:
    for file in schemas_dir.iterdir():
        shutil.copy(file, tmp_path / file.name)
    with (tmp_path / name).open("ab") as handle:
        handle.write(b"\n<!-- local edit -->\n")
    with pytest.raises(SchemaError, match="altered") as caught:
        validate_bytes(tei_bytes, schemas_dir=tmp_path)
    assert "github" in str(caught.value).lower()
    (tmp_path / name).unlink()
    with pytest.raises(SchemaError, match=r"not found.*run `lexbuild schemas fetch`") as caught:
        validate_bytes(tei_bytes, schemas_dir=tmp_path)
    assert name in str(caught.value)


# ----------------------------------------------------------------------------- locating problems


def test_duplicate_xml_id_is_found_in_the_bytes(
    tei_bytes: bytes, loaded: LoadedLexicon, schemas_dir: Path, sample_lexicon_dir: Path
) -> None:
    data = tei_bytes.replace(b'xml:id="douter.s1.x2"', b'xml:id="douter.s1.x1"')
    findings = validate_bytes(data, schemas_dir=schemas_dir, source_map=loaded.source_map)
    assert len(findings) == 1
    finding = findings[0]
    assert "douter.s1.x1 already defined" in finding.message
    second = data.index(b'xml:id="douter.s1.x1"', data.index(b'xml:id="douter.s1.x1"') + 1)
    assert finding.line == data[:second].count(b"\n") + 1
    assert finding.xml_id == "douter.s1.x1"
    douter = sample_lexicon_dir / "entries" / "douter.yaml"
    assert finding.source is not None and Path(finding.source.file).name == "douter.yaml"
    assert finding.source.line == yaml_line(douter, "id: douter.s1.x1")


def test_schematron_problem_names_the_frame_and_its_yaml_line(
    tei_bytes: bytes, loaded: LoadedLexicon, schemas_dir: Path, sample_lexicon_dir: Path
) -> None:
    # Two gramGrp in one sense break the TEILex0.sch rule (encoding study).
    data = re.sub(
        rb'(<sense xml:id="douter\.s2\.f1" n="[^"]*">\n)', rb'\1<gramGrp type="extra"/>', tei_bytes
    )
    findings = validate_bytes(data, schemas_dir=schemas_dir, source_map=loaded.source_map)
    assert [f.schema for f in findings] == ["TEILex0.sch"]
    assert "no more than one gramGrp" in findings[0].message
    assert findings[0].xml_id == "douter.s2.f1"
    assert findings[0].source is not None
    douter = sample_lexicon_dir / "entries" / "douter.yaml"
    assert findings[0].source.line == yaml_line(douter, "id: douter.s2.f1")


def test_relaxng_problem_names_the_entry(
    tei_bytes: bytes, loaded: LoadedLexicon, schemas_dir: Path, sample_lexicon_dir: Path
) -> None:
    # @status is not allowed on entry in TEI Lex-0 (encoding study, RelaxNG).
    data = tei_bytes.replace(
        b'<entry xml:id="jouer" xml:lang="fr"', b'<entry xml:id="jouer" xml:lang="fr" status="x"'
    )
    findings = validate_bytes(data, schemas_dir=schemas_dir, source_map=loaded.source_map)
    invalid = [f for f in findings if "Invalid attribute status" in f.message]
    assert invalid and invalid[0].schema == "TEILex0.rng"
    assert invalid[0].xml_id == "jouer"
    assert invalid[0].line == xml_line(data, b'<entry xml:id="jouer"')
    assert invalid[0].source is not None
    assert Path(invalid[0].source.file) == sample_lexicon_dir / "entries" / "jouer.yaml"
    assert invalid[0].source.line == yaml_line(
        sample_lexicon_dir / "entries" / "jouer.yaml", "id: jouer"
    )


def test_dangling_pointers_are_found(tei_bytes: bytes, lmf_bytes: bytes, schemas_dir: Path) -> None:
    # RelaxNG types pointers as anyURI and cannot see dangling ones (encoding study, gotcha 8).
    data = tei_bytes.replace(b'corresp="#douter.s1.f1.a1"', b'corresp="#douter.s1.f1.a9"', 1)
    findings = validate_bytes(data, schemas_dir=schemas_dir)
    pointing = etree.fromstring(data).xpath("//*[@corresp='#douter.s1.f1.a9']")[0]
    holder = pointing.xpath("ancestor-or-self::*[@xml:id][1]/@xml:id")[0]
    assert [(f.schema, f.xml_id, f.line) for f in findings] == [
        ("lexbuild pointer check", holder, pointing.sourceline)
    ]
    # @subtype without @type: a rule embedded in TEILex0.rng that libxml2 does not run (study).
    data = tei_bytes.replace(b'<seg type="arg" subtype="slot1"', b'<seg subtype="slot1"', 1)
    findings = validate_bytes(data, schemas_dir=schemas_dir)
    assert [f.message for f in findings if f.schema == "lexbuild pointer check"] == [
        "@subtype is used without @type (a TEI rule)"
    ]
    data = re.sub(
        rb'(att="subcategorizationFrame" val=")[^"]*"', rb'\1douter.s2.f7"', lmf_bytes, count=1
    )
    findings = validate_bytes(data, schemas_dir=schemas_dir)
    assert [f.schema for f in findings] == ["lexbuild pointer check"]
    assert "douter.s2.f7" in findings[0].message
    # An argument slot that names no SyntacticArgument, before a dangling frame pointer in the
    # document: findings list the frame pointers first, then the slots (each in document order).
    last = lmf_bytes.rindex(b'att="subcategorizationFrame" val="')
    data = lmf_bytes[:last] + re.sub(
        rb'(att="subcategorizationFrame" val=")[^"]*"', rb'\1douter.s2.f7"', lmf_bytes[last:],
        count=1,
    )
    data = re.sub(
        rb'(att="argumentPosition" val=")[^"=]*=', rb'\1agir.s1.f1.a9=', data, count=1
    )
    findings = validate_bytes(data, schemas_dir=schemas_dir)
    assert [f.schema for f in findings] == ["lexbuild pointer check"] * 2
    assert "douter.s2.f7" in findings[0].message and "agir.s1.f1.a9" in findings[1].message
    assert findings[1].line < findings[0].line


def test_lmf_duplicate_ids_found_by_the_dtd(lmf_bytes: bytes, schemas_dir: Path) -> None:
    data = lmf_bytes.replace(b'<Sense id="douter.s2"', b'<Sense id="douter.s1"')
    findings = validate_bytes(data, schemas_dir=schemas_dir)
    assert any(
        f.schema == "DTD_LMF_REV_16.dtd" and "douter.s1 already defined" in f.message
        for f in findings
    )


def test_broken_documents_give_findings_not_crashes(schemas_dir: Path) -> None:
    broken = b'<?xml version="1.0"?>\n<TEI xmlns="http://www.tei-c.org/ns/1.0">\n<text>\n</TEI>\n'
    findings = validate_bytes(broken, schemas_dir=schemas_dir)
    assert findings and findings[0].line in (3, 4)
    bomb = b'<!DOCTYPE x [<!ENTITY a "b">]><x>&a;</x>'
    findings = validate_bytes(bomb, schemas_dir=schemas_dir)
    assert [f.schema for f in findings] == ["lexbuild safe parsing"]
    findings = validate_bytes(b"<html/>", schemas_dir=schemas_dir)
    assert "neither TEI" in findings[0].message


# ----------------------------------------------------------------------------- extra schemas


def test_extra_schematron_maps_back_to_the_yaml_line(
    tei_bytes: bytes, loaded: LoadedLexicon, schemas_dir: Path, sample_lexicon_dir: Path
) -> None:
    extra = ExtraSchema(path="tei_short_gloss.sch", kind="sch", format="tei")
    findings = validate_bytes(
        tei_bytes,
        schemas_dir=schemas_dir,
        extra_schemas=[extra],
        base_dir=FIXTURES,
        source_map=loaded.source_map,
    )
    # Every gloss over 60 characters, and nothing else, is reported at its sense.
    long_glosses = {
        sense.id
        for entry in loaded.lexicon.entries
        for sense in entry.senses
        if len(sense.gloss) > 60
    }
    assert long_glosses and {f.xml_id for f in findings} == long_glosses
    for finding in findings:
        assert finding.schema == "tei_short_gloss.sch (extra sch)"
        assert finding.xml_id is not None and finding.source is not None
        entry = finding.xml_id.rsplit(".s", 1)[0]
        path = sample_lexicon_dir / "entries" / f"{entry}.yaml"
        assert Path(finding.source.file) == path
        assert finding.source.line == yaml_line(path, f"id: {finding.xml_id}")


def test_extra_xsd_reports_element_paths_and_sources(
    lmf_bytes: bytes, loaded: LoadedLexicon, schemas_dir: Path, sample_lexicon_dir: Path
) -> None:
    extra = ExtraSchema(path="lmf_example_feats.xsd", kind="xsd", format="lmf")
    findings = validate_bytes(
        lmf_bytes,
        schemas_dir=schemas_dir,
        extra_schemas=[extra],
        base_dir=FIXTURES,
        source_map=loaded.source_map,
    )
    # SenseExample holds 5 feats + one argumentPosition per argument: > 7 feats when 3 arguments.
    crowded = {
        example.id
        for entry in loaded.lexicon.entries
        for sense in entry.senses
        for example in sense.examples
        if 5 + len(example.arguments) > 7
    }
    assert crowded and {f.xml_id for f in findings} == crowded
    for finding in findings:
        assert "/SenseExample" in finding.message  # xmlschema's element path
        assert finding.xml_id is not None and finding.source is not None
        assert finding.line == xml_line(lmf_bytes, f'<SenseExample id="{finding.xml_id}"'.encode())
        path = sample_lexicon_dir / "entries" / f"{finding.xml_id.split('.s')[0]}.yaml"
        assert finding.source.line == yaml_line(path, f"id: {finding.xml_id}")


def test_extra_relaxng_and_format_filter(
    tei_bytes: bytes, lmf_bytes: bytes, schemas_dir: Path
) -> None:
    extra = ExtraSchema(path="lmf_version_17.rng", kind="rng", format="lmf")
    findings = validate_bytes(
        lmf_bytes, schemas_dir=schemas_dir, extra_schemas=[extra], base_dir=FIXTURES
    )
    assert findings and all(f.schema == "lmf_version_17.rng (extra rng)" for f in findings)
    # An LMF customisation does not apply to TEI documents.
    assert (
        validate_bytes(tei_bytes, schemas_dir=schemas_dir, extra_schemas=[extra], base_dir=FIXTURES)
        == []
    )


def test_missing_extra_schema_is_an_error(lmf_bytes: bytes, schemas_dir: Path) -> None:
    extra = ExtraSchema(path="nowhere.xsd", kind="xsd", format="lmf")
    with pytest.raises(SchemaError, match=r"nowhere\.xsd.*not found"):
        validate_bytes(lmf_bytes, schemas_dir=schemas_dir, extra_schemas=[extra], base_dir=FIXTURES)


def test_findings_serialise() -> None:
    finding = XmlFinding("bad", 3, "a.s1", None, "TEILex0.rng", "x.xml")
    assert str(finding) == "x.xml:3: bad [TEILex0.rng] (in id a.s1)"
    data = json.loads(findings_json([finding]))
    assert data["problems"] == 1 and data["findings"][0]["xml_id"] == "a.s1"


# ----------------------------------------------------------------------------- RelaxNG in parts


def test_relaxng_in_parts_finds_the_same_problems(
    tei_bytes: bytes, loaded: LoadedLexicon, schemas_dir: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(validate_module, "MIN_ENTRIES_PER_PART", 3)
    tree = parse_untrusted(tei_bytes)
    parts = validate_module._tei_parts(tei_bytes, tree, 3)
    assert parts is not None and len(parts) == 3
    # Each part is a TEI Lex-0 document of its own (TEILex0.rng, ../shared/schemas).
    rng = etree.RelaxNG(etree.parse(str(schemas_dir / "TEILex0.rng")))
    assert all(rng.validate(etree.fromstring(document)) for document, _, _ in parts)
    broken = tei_bytes
    for entry in (b"agir", b"jouer", b"tirer"):  # first, middle and last part
        broken = broken.replace(
            b'<entry xml:id="' + entry + b'" xml:lang="fr"',
            b'<entry xml:id="' + entry + b'" xml:lang="fr" status="x"',
        )
    whole = validate_bytes(broken, schemas_dir=schemas_dir, workers=1, source_map=loaded.source_map)
    split = validate_bytes(broken, schemas_dir=schemas_dir, workers=3, source_map=loaded.source_map)
    # libxml2 stops at the first entry that fails in a body; each part reports its own.
    assert {f.xml_id for f in whole if "status" in f.message} == {"agir"}
    assert {f.xml_id for f in split if "status" in f.message} == {"agir", "jouer", "tirer"}
    assert set(map(str, whole)) <= set(map(str, split))
    jouer = next(f for f in split if f.xml_id == "jouer" and "status" in f.message)
    assert jouer.line == xml_line(broken, b'<entry xml:id="jouer"')


def test_parts_are_cut_at_the_right_lines_past_line_65535(
    loaded: LoadedLexicon, monkeypatch: pytest.MonkeyPatch
) -> None:
    # libxml2's sourceline drifts by one past line 65535; the split must not rely on it.
    copies = []
    for number in range(60):
        for entry in loaded.lexicon.entries:
            text = entry.model_dump_json().replace(f'"{entry.id}', f'"{entry.id}-{number}')
            copies.append(type(entry).model_validate_json(text))
    big = to_tei(loaded.lexicon.model_copy(update={"entries": copies}))
    assert big.count(b"\n") > 70_000
    monkeypatch.setattr(validate_module, "MIN_ENTRIES_PER_PART", 100)
    parts = validate_module._tei_parts(big, parse_untrusted(big), 4)
    assert parts is not None and len(parts) == 4
    for document, shift, first_line in parts:
        first_id = document[document.index(b"<entry xml:id=", len(b"<TEI")) :].split(b'"')[1]
        assert shift + first_line == xml_line(big, b'<entry xml:id="' + first_id + b'"')

"""TEI Lex-0 export and read-back.

Every schema check compiles the published files itself, as the encoding study
(../shared/encoding/NOTES.md) prescribes, so that a bug in lexbuild.formats.validate cannot hide an
invalid export.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from lxml import etree, isoschematron

from lexbuild.errors import SourceError, UnsafeXMLError
from lexbuild.formats.tei import TEI_NS, TEIError, read_tei, to_tei
from lexbuild.lexicon.model import (
    ArgumentSpan,
    Entry,
    Example,
    Frame,
    Lexicon,
    LexiconMeta,
    Sense,
    SourceRef,
    Status,
)
from lexbuild.lexicon.sources import load_lexicon
from tests.strategies import lexicons

NS = {"t": TEI_NS}
XML_ID = "{http://www.w3.org/XML/1998/namespace}id"


class PublishedTEI:
    """TEI Lex-0 RelaxNG + Schematron, ../shared/schemas (TEILex0.rng, TEILex0.sch)."""

    def __init__(self, folder: Path) -> None:
        self.rng = etree.RelaxNG(etree.parse(str(folder / "TEILex0.rng")))
        sch = etree.parse(str(folder / "TEILex0.sch"))
        # queryBinding trick from the encoding study: the 3 rules are XPath 1.
        sch.getroot().set("queryBinding", "xslt")
        self.sch = isoschematron.Schematron(
            sch, validate_schema=False, error_finder=isoschematron.Schematron.ASSERTS_AND_REPORTS
        )

    def errors(self, data: bytes) -> list[str]:
        # Parse the bytes: lxml checks xml:id syntax and uniqueness only when parsing.
        tree = etree.fromstring(data).getroottree()
        problems = []
        if not self.rng.validate(tree):
            problems += [f"rng:{e.line}: {e.message}" for e in self.rng.error_log]
        if not self.sch.validate(tree):
            problems += [f"sch: {e.message}" for e in self.sch.error_log]
        return problems


@pytest.fixture(scope="module")
def published(schemas_dir: Path) -> PublishedTEI:
    return PublishedTEI(schemas_dir)


@pytest.fixture(scope="module")
def sample(sample_lexicon_dir: Path) -> Lexicon:
    return load_lexicon(sample_lexicon_dir).lexicon


def comparable(lexicon: Lexicon) -> dict[str, Any]:
    """What the TEI export keeps: everything but induction provenance and project bookkeeping;
    argument spans compared as a set (they are read back in text order)."""
    data = lexicon.model_dump(mode="json")
    data["meta"]["retired_ids"] = []
    data["meta"]["extra_schemas"] = []
    data["entries"].sort(key=lambda entry: entry["id"])
    for entry in data["entries"]:
        for sense in entry["senses"]:
            sense["induction"] = None
            for example in sense["examples"]:
                example["arguments"].sort(key=lambda a: (a["span"], a["slot"]))
    return data


def small_lexicon(**sense_fields: Any) -> Lexicon:
    text = sense_fields.pop("text", "Le passeur traverse la rade.")
    verb = sense_fields.pop("verb", (11, 19))
    arguments = sense_fields.pop("arguments", [])
    sense = Sense(
        id="traverser.s1",
        gloss=sense_fields.pop("gloss", "passer d'un bord à l'autre"),
        status=Status.REVIEWED,
        frames=[Frame(id="traverser.s1.f1", pattern="subj:NP obj:NP", frequency=3)],
        examples=[
            Example(
                id="traverser.s1.x1",
                text=text,
                verb=verb,
                frame="traverser.s1.f1",
                arguments=arguments,
                source=SourceRef(corpus="brevenn", sentence="port.1"),
            )
        ],
        **sense_fields,
    )
    return Lexicon(
        meta=LexiconMeta(
            title="Essai",
            language="fr",
            edition=2,
            release_date=dt.date(2026, 12, 1),
            licence="CC-BY-4.0",
        ),
        entries=[Entry(id="traverser", lemma="traverser", senses=[sense])],
    )


# ----------------------------------------------------------------------------- validity


def test_sample_export_is_valid(sample: Lexicon, published: PublishedTEI) -> None:
    # TEI Lex-0 RelaxNG + Schematron, ../shared/schemas
    assert published.errors(to_tei(sample, changes=["Première édition"])) == []


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(lexicons())
def test_generated_lexicons_export_valid_and_read_back(
    published: PublishedTEI, lexicon: Lexicon
) -> None:
    data = to_tei(lexicon, changes=["ajout <&> « test »"])
    # TEI Lex-0 RelaxNG + Schematron, ../shared/schemas
    assert published.errors(data) == []
    assert comparable(read_tei(data)) == comparable(lexicon)


def test_the_validity_check_can_fail(sample: Lexicon, published: PublishedTEI) -> None:
    # Two gramGrp under one sense: the Schematron rule of TEILex0.sch (per the encoding study).
    data = to_tei(sample).replace(
        b'<gramGrp type="frame">', b'<gramGrp type="x"/><gramGrp type="frame">', 1
    )
    assert any(problem.startswith("sch") for problem in published.errors(data))
    # entry/@status is not in the schema (RelaxNG), per the encoding study.
    data = to_tei(sample).replace(b'xml:lang="fr"', b'xml:lang="fr" status="x"', 1)
    assert any(problem.startswith("rng") for problem in published.errors(data))


def test_nasty_characters_stay_valid_and_exact(published: PublishedTEI) -> None:
    text = 'A <b> & "c" 😀 שלום\r\n\tد traverse ]]> l\'eau'
    start = text.index("traverse")
    lexicon = small_lexicon(
        text=text,
        verb=(start, start + 8),
        gloss="« a < b & c » \u202emirror\u202c 🇫🇷 'x' \"y\"\r",
        note="note\twith\ttabs\nand lines",
        flags=["<flag/>", "&amp;"],
        arguments=[ArgumentSpan(slot=1, span=(0, 4)), ArgumentSpan(slot=2, span=(2, 12))],
    )
    data = to_tei(lexicon, changes=["<change> & 'quote'"])
    assert published.errors(data) == []  # TEI Lex-0 RelaxNG + Schematron, ../shared/schemas
    assert comparable(read_tei(data)) == comparable(lexicon)


def test_control_character_is_refused_with_its_place() -> None:
    lexicon = small_lexicon(gloss="bad \x01 gloss")
    with pytest.raises(TEIError, match=r"entry traverser\.senses\[0\]\.gloss.*U\+0001"):
        to_tei(lexicon)


def test_empty_lexicon_is_refused() -> None:
    # An empty body is invalid TEI Lex-0 (checked against TEILex0.rng while writing this test).
    with pytest.raises(TEIError, match="no entry"):
        to_tei(small_lexicon().model_copy(update={"entries": []}))


def test_duplicate_ids_are_refused_before_writing() -> None:
    lexicon = small_lexicon()
    entry = lexicon.entries[0]
    twin = entry.senses[0].model_copy(update={"frames": [], "examples": []})
    broken = lexicon.model_copy(
        update={"entries": [entry.model_copy(update={"senses": [entry.senses[0], twin]})]}
    )
    with pytest.raises(TEIError, match=r"traverser\.s1"):
        to_tei(broken)


# ----------------------------------------------------------------------------- encoding


def test_type_and_availability_order_are_what_the_published_schema_demands(
    sample: Lexicon, published: PublishedTEI
) -> None:
    # The two header facts above, checked against TEILex0.rng itself (../shared/schemas): the
    # export is valid, and the same document without @type, or with availability moved first,
    # is not.
    data = to_tei(sample)
    assert published.errors(data) == []
    root = etree.fromstring(data)
    del root.attrib["type"]
    assert published.errors(etree.tostring(root))
    root = etree.fromstring(data)
    publication = root.find("t:teiHeader/t:fileDesc/t:publicationStmt", NS)
    publication.insert(0, publication[-1])
    assert published.errors(etree.tostring(root))


def test_header_carries_edition_date_licence_and_changes(sample: Lexicon) -> None:
    root = etree.fromstring(to_tei(sample, changes=["un", "deux"]))
    header = root.find("t:teiHeader", NS)
    assert header is not None
    # TEILex0.rng (../shared/schemas) requires TEI/@type, whose only value is "lex-0".
    assert root.get("type") == "lex-0"
    edition = header.find("t:fileDesc/t:editionStmt/t:edition", NS)
    assert edition is not None and edition.get("n") == str(sample.meta.edition)
    date = sample.meta.release_date.isoformat()
    assert header.find("t:fileDesc/t:editionStmt/t:edition/t:date", NS).get("when") == date
    publication = header.find("t:fileDesc/t:publicationStmt", NS)
    # TEILex0.rng, define "publicationStmt": agency+, detail*, then exactly one availability.
    assert etree.QName(publication[-1]).localname == "availability"
    assert publication.findtext("t:availability/t:licence", namespaces=NS) == sample.meta.licence
    changes = header.findall("t:revisionDesc/t:change", NS)
    assert [c.text for c in changes] == [f"Edition {sample.meta.edition}", "un", "deux"]
    assert changes[0].get("when") == date
    language = header.find("t:profileDesc/t:langUsage/t:language", NS)
    assert language.get("ident") == "fr"
    editors = header.findall("t:fileDesc/t:titleStmt/t:editor", NS)
    assert [e.text for e in editors] == [editor.name for editor in sample.meta.editors]


def test_one_sub_sense_per_frame_and_spans_cover_the_words(sample: Lexicon) -> None:
    root = etree.fromstring(to_tei(sample))
    for entry in sample.entries:
        for sense in entry.senses:
            element = next(e for e in root.iter(f"{{{TEI_NS}}}sense") if e.get(XML_ID) == sense.id)
            subs = element.findall("t:sense", NS)
            assert [sub.get(XML_ID) for sub in subs] == [frame.id for frame in sense.frames]
            for sub, frame in zip(subs, sense.frames, strict=True):
                groups = sub.findall("t:gramGrp", NS)
                assert len(groups) == 1
                assert groups[0].findtext("t:gram[@type='construction']", namespaces=NS) == (
                    frame.pattern
                )
                assert len(groups[0].findall("t:gram[@type='slot']", NS)) == len(frame.slots)
            for example in sense.examples:
                cit = next(
                    c for c in element.iter(f"{{{TEI_NS}}}cit") if c.get(XML_ID) == example.id
                )
                verb = cit.find("t:quote/t:ref[@type='oRef']", NS)
                start, end = example.verb
                assert verb.text == example.text[start:end]
                assert "".join(cit.find("t:quote", NS).itertext()) == example.text


def test_crossing_spans_are_kept_exactly(published: PublishedTEI) -> None:
    # verb 11-19, one argument crossing it, one inside another, one at the very end
    lexicon = small_lexicon(
        arguments=[
            ArgumentSpan(slot=1, span=(0, 14)),
            ArgumentSpan(slot=2, span=(20, 27)),
            ArgumentSpan(slot=2, span=(23, 28)),
            ArgumentSpan(slot=1, span=(3, 10)),
            ArgumentSpan(slot=3, span=(5, 5)),  # empty
            ArgumentSpan(slot=1, span=(20, 99)),  # past the end (check E201 would refuse it)
            ArgumentSpan(slot=2, span=(-3, 2)),
        ]
    )
    data = to_tei(lexicon)
    assert published.errors(data) == []  # TEI Lex-0 RelaxNG + Schematron, ../shared/schemas
    assert comparable(read_tei(data)) == comparable(lexicon)


def test_frames_without_ids_get_fresh_ones(published: PublishedTEI) -> None:
    lexicon = small_lexicon()
    sense = lexicon.entries[0].senses[0]
    sense.frames.append(Frame(pattern="subj:NP obl:PP[à cause de]?", frequency=1))
    data = to_tei(lexicon)
    assert published.errors(data) == []
    frames = read_tei(data).entries[0].senses[0].frames
    assert [frame.id for frame in frames] == ["traverser.s1.f1", "traverser.s1.f2"]


# ----------------------------------------------------------------------------- determinism


def test_export_is_deterministic(sample: Lexicon) -> None:
    first = to_tei(sample, changes=["x"])
    shuffled = sample.model_copy(update={"entries": list(reversed(sample.entries))})
    assert to_tei(shuffled, changes=["x"]) == first
    order = [e.get(XML_ID) for e in etree.fromstring(first).iter(f"{{{TEI_NS}}}entry")]
    assert order == sorted(entry.id for entry in sample.entries)


def test_sample_reads_back_equal(sample: Lexicon) -> None:
    assert comparable(read_tei(to_tei(sample))) == comparable(sample)


# ----------------------------------------------------------------------------- reading


def test_reader_refuses_entities(tmp_path: Path) -> None:
    bomb = (
        b'<?xml version="1.0"?><!DOCTYPE TEI [<!ENTITY a "aaaaaaaaaa">'
        b'<!ENTITY b "&a;&a;&a;&a;&a;">]><TEI xmlns="http://www.tei-c.org/ns/1.0">&b;</TEI>'
    )
    with pytest.raises(UnsafeXMLError):
        read_tei(bomb)
    path = tmp_path / "bomb.xml"
    path.write_bytes(bomb)
    with pytest.raises(UnsafeXMLError):
        read_tei(path)


def test_reader_refuses_other_documents() -> None:
    with pytest.raises(SourceError, match="not a TEI"):
        read_tei(b"<LexicalResource/>")

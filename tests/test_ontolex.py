"""OntoLex-Lemon export of sample_lexicon: SHACL-valid, parsed back by rdflib to the same counts.

References outside the project: rdflib's Turtle parser; pySHACL for the shapes; the YAML
entry files read with PyYAML (not with lexbuild's loader) for the counts; the W3C report's
namespace IRIs as published in its vocabulary files (ontolex/ontolex, Ontologies/w3c/ttl).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
import yaml

rdflib = pytest.importorskip("rdflib")
pytest.importorskip("pyshacl")

from lexbuild.cli import main  # noqa: E402
from lexbuild.formats.ontolex import to_ontolex, validate_ontolex  # noqa: E402
from lexbuild.formats.registry import all_formats, format_for_file, get_format  # noqa: E402
from lexbuild.lexicon.sources import load_lexicon  # noqa: E402

ONTOLEX = rdflib.Namespace("http://www.w3.org/ns/lemon/ontolex#")
SYNSEM = rdflib.Namespace("http://www.w3.org/ns/lemon/synsem#")
LIME = rdflib.Namespace("http://www.w3.org/ns/lemon/lime#")
LEXINFO = rdflib.Namespace("http://www.lexinfo.net/ontology/3.0/lexinfo#")
SKOS = rdflib.Namespace("http://www.w3.org/2004/02/skos/core#")


@pytest.fixture(scope="module")
def turtle(sample_lexicon_dir: Path) -> bytes:
    return to_ontolex(load_lexicon(sample_lexicon_dir).lexicon)


@pytest.fixture(scope="module")
def graph(turtle: bytes) -> object:
    return rdflib.Graph().parse(data=turtle, format="turtle")


def _yaml_counts(folder: Path) -> dict[str, int]:
    counts = {"entries": 0, "senses": 0, "frames": 0, "examples": 0}
    for path in sorted((folder / "entries").glob("*.yaml")):
        entry = yaml.safe_load(path.read_text(encoding="utf-8"))
        counts["entries"] += 1
        for sense in entry.get("senses") or []:
            counts["senses"] += 1
            counts["frames"] += len(sense.get("frames") or [])
            counts["examples"] += len(sense.get("examples") or [])
    return counts


def test_parses_back_to_the_counts_of_the_sources(
    graph: rdflib.Graph, sample_lexicon_dir: Path
) -> None:
    expected = _yaml_counts(sample_lexicon_dir)
    assert expected["frames"] > 0 and expected["examples"] > 0  # not a vacuous comparison
    lexicon = next(graph.subjects(rdflib.RDF.type, LIME.Lexicon))
    listed = set(graph.objects(lexicon, LIME.entry))
    assert len(listed) == expected["entries"]
    assert all((e, rdflib.RDF.type, ONTOLEX.LexicalEntry) in graph for e in listed)
    senses = {s for e in listed for s in graph.objects(e, ONTOLEX.sense)}
    assert len(senses) == expected["senses"]
    assert len(set(graph.subjects(rdflib.RDF.type, ONTOLEX.LexicalSense))) == expected["senses"]
    frames = {f for e in listed for f in graph.objects(e, SYNSEM.synBehavior)}
    assert len(frames) == expected["frames"]
    assert len(set(graph.subjects(rdflib.RDF.type, SYNSEM.SyntacticFrame))) == expected["frames"]
    examples = sum(1 for s in senses for _ in graph.objects(s, SKOS.example))
    assert examples == expected["examples"]


def test_lemmas_slots_and_markers(graph: rdflib.Graph, sample_lexicon_dir: Path) -> None:
    lexicon = load_lexicon(sample_lexicon_dir).lexicon
    by_lemma = {
        str(rep): entry
        for entry in graph.subjects(rdflib.RDF.type, ONTOLEX.LexicalEntry)
        for form in graph.objects(entry, ONTOLEX.canonicalForm)
        for rep in graph.objects(form, ONTOLEX.writtenRep)
    }
    for entry in lexicon.entries:
        node = by_lemma[entry.lemma]
        assert (node, LEXINFO.partOfSpeech, LEXINFO.verb) in graph
    # Every frame has its subject as lexinfo:subject, and every prepositional object a marker
    # that is a lexical entry whose written form is the preposition.
    subjects = list(graph.subject_objects(LEXINFO.subject))
    assert len(subjects) == sum(
        1 for e in lexicon.entries for s in e.senses for f in s.frames
        for slot in f.slots if slot.function.value == "subj"
    )
    prepositions = {
        slot.marker for e in lexicon.entries for s in e.senses for f in s.frames
        for slot in f.slots if slot.function.value == "obl" and slot.marker
    }
    found = set()
    for _, argument in graph.subject_objects(LEXINFO.prepositionalObject):
        marker = graph.value(argument, SYNSEM.marker)
        assert (marker, rdflib.RDF.type, ONTOLEX.LexicalEntry) in graph
        form = graph.value(marker, ONTOLEX.canonicalForm)
        found.add(str(graph.value(form, ONTOLEX.writtenRep)))
    assert found == prepositions and "à" in found
    # A sense reaches the arguments of its own frames (ontology mapping, same IRI).
    for sense in graph.subjects(rdflib.RDF.type, SYNSEM.OntoMap):
        assert graph.value(sense, SYNSEM.ontoMapping) == sense


def test_conforms_to_the_shapes_and_the_shapes_bite(turtle: bytes) -> None:
    assert validate_ontolex(turtle) == []
    graph = rdflib.Graph().parse(data=turtle, format="turtle")
    entry = next(graph.subjects(rdflib.RDF.type, ONTOLEX.LexicalEntry))
    graph.remove((entry, ONTOLEX.canonicalForm, None))
    some_frame = next(graph.subjects(rdflib.RDF.type, SYNSEM.SyntacticFrame))
    graph.remove((None, SYNSEM.synBehavior, some_frame))
    broken = graph.serialize(format="turtle", encoding="utf-8")
    findings = validate_ontolex(broken, name="broken.ttl")
    focus = {f.xml_id for f in findings}
    assert str(entry) in focus and str(some_frame) in focus
    assert validate_ontolex(b"@prefix : <urn:x#> . :a :b", name="bad.ttl")[0].schema == "Turtle"


def test_deterministic(turtle: bytes, sample_lexicon_dir: Path) -> None:
    assert to_ontolex(load_lexicon(sample_lexicon_dir).lexicon) == turtle


def test_registry_and_cli(tmp_path: Path, sample_lexicon_dir: Path, turtle: bytes) -> None:
    names = [f.name for f in all_formats()]
    assert names == ["tei", "lmf", "ontolex"]
    ontolex = get_format("ontolex")
    assert (ontolex.suffix, ontolex.media_type) == (".ontolex.ttl", "text/turtle")
    assert format_for_file("x/lexicon.ontolex.ttl") is ontolex
    assert format_for_file("x/other.xml").name == "tei"  # XML: TEI or LMF, told by the root
    out = tmp_path / "lexicon.ontolex.ttl"
    argv = ["export", str(sample_lexicon_dir), "--format", "ontolex", "--output", str(out)]
    assert main(argv) == 0
    assert out.read_bytes() == turtle
    assert main(["validate", str(out)]) == 0
    out.write_bytes(turtle.replace(b"ontolex:canonicalForm", b"ontolex:otherForm", 1))
    assert main(["validate", str(out), "--format", "json"]) == 1


def test_release_includes_it(tmp_path: Path, sample_lexicon_dir: Path, schemas_dir: Path,
                             turtle: bytes) -> None:
    from lexbuild.editions.release import release

    result = release(sample_lexicon_dir, edition=1, output=tmp_path, schemas_dir=schemas_dir)
    published = result.folder / "lexicon.ontolex.ttl"
    # The release sets the edition number in the metadata, which OntoLex does not carry.
    assert published.read_bytes() == turtle
    manifest = json.loads((result.folder / "manifest.json").read_text(encoding="utf-8"))
    assert manifest["artefacts"]["lexicon.ontolex.ttl"]["format"].startswith("OntoLex-Lemon")

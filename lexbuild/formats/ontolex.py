"""OntoLex-Lemon in Turtle: writer and SHACL validation (the third registered format).

The model is the W3C Ontology-Lexica Community Group report "Lexicon Model for Ontologies"
(2016), its synsem module and the LexInfo 3.0 vocabulary. Every IRI below was checked against
the vocabulary files: ``ontolex/ontolex`` (commit 39973ce) ``Ontologies/w3c/ttl/ontolex.ttl``,
``synsem.ttl`` and ``lime.ttl``; ``ontolex/lexinfo`` (commit 4182300)
``docs/ontology/3.0/lexinfo.ttl``; SKOS as rdflib ships it (``rdflib.namespace.SKOS``).

Mapping (section anchors of the report's ``specification.html``):

* the dictionary is a ``lime:Lexicon`` with ``lime:language``, listing each entry with
  ``lime:entry`` (#lexicon-and-lexicon-metadata);
* each entry is an ``ontolex:LexicalEntry`` with one ``ontolex:canonicalForm`` (an
  ``ontolex:Form`` whose ``ontolex:writtenRep`` is the lemma, language-tagged; #canonicalForm)
  and ``lexinfo:partOfSpeech lexinfo:verb`` for verbs;
* each sense is an ``ontolex:LexicalSense`` reached by ``ontolex:sense`` (#sense), its gloss a
  ``skos:definition``;
* each frame is a ``synsem:SyntacticFrame`` reached from the entry by ``synsem:synBehavior``
  (#synBehavior; frames belong to one sense here, so each frame node is the entry's own, as the
  report asks); its slots are ``synsem:SyntacticArgument`` nodes, linked with the LexInfo
  sub-property of ``synsem:synArg`` naming their function where LexInfo has one (subject,
  directObject, indirectObject, prepositionalObject, reflexiveObject, clausalArg /
  infinitiveClause, predicativeAdjective / complement; #arguments), plain ``synsem:synArg``
  otherwise; an optional slot has ``synsem:optional true`` (#optional); a slot's marker (the
  preposition, complementiser or clitic) is ``synsem:marker``, an object property whose value
  is a lexical entry of the marker word (#marker), so each marker is a small
  ``ontolex:LexicalEntry`` of its own, not listed in the lexicon's entries;
* the sense is linked to its frames as the report's ontology mappings do (#ontology-mappings):
  the sense is also a ``synsem:OntoMap`` (same IRI, as the report recommends, with
  ``synsem:ontoMapping`` to itself) and reaches each argument of its frames by
  ``synsem:ontoCorrespondence``;
* examples are ``skos:example`` literals of the sense. The lexicography module
  (``lexicog:UsageExample``) would carry more structure, but its vocabulary file was not
  available to check its terms, and an unchecked IRI is never written; ``skos:example`` is the
  SKOS property for "an example of the use of a concept", which the core report builds on.

Editorial status, provenance and frequencies stay in TEI and LMF. Output is deterministic: no
blank nodes, and rdflib's Turtle serialiser sorts subjects and predicates.
"""

from __future__ import annotations

from collections.abc import Sequence
from importlib import resources
from typing import Any
from urllib.parse import quote

from lexbuild.formats.registry import OutputFormat, ValidationContext
from lexbuild.lexicon.model import Entry, Frame, Function, Lexicon, Realisation, Slot

__all__ = [
    "FORMAT",
    "LEXINFO",
    "LIME",
    "ONTOLEX",
    "SYNSEM",
    "parse_ontolex",
    "shapes_graph",
    "to_ontolex",
    "validate_ontolex",
]

ONTOLEX = "http://www.w3.org/ns/lemon/ontolex#"
SYNSEM = "http://www.w3.org/ns/lemon/synsem#"
LIME = "http://www.w3.org/ns/lemon/lime#"
LEXINFO = "http://www.lexinfo.net/ontology/3.0/lexinfo#"
SKOS = "http://www.w3.org/2004/02/skos/core#"
#: The base of every IRI the writer makes (entries, senses, frames ...), when none is given.
DEFAULT_BASE = "urn:lexbuild:"
SHAPES_FILE = "ontolex_shapes.ttl"

#: The LexInfo property naming a slot's function (``lexinfo.ttl``: sub-properties of synArg).
_FUNCTION_PROPERTY: dict[Function, str] = {
    Function.SUBJECT: "subject",
    Function.OBJECT: "directObject",
    Function.INDIRECT_OBJECT: "indirectObject",
    Function.REFLEXIVE: "reflexiveObject",
    Function.CLAUSAL: "clausalArg",
}


def _argument_property(slot: Slot) -> str:
    """The full IRI of the property linking a frame to this slot's argument."""
    if slot.function is Function.OBLIQUE:
        # prepositionalObject: "a non-optional object marked with a preposition" (#arguments)
        return LEXINFO + "prepositionalObject" if slot.marker else SYNSEM + "synArg"
    if slot.function is Function.CLAUSAL and slot.realisation is Realisation.INFINITIVE:
        return LEXINFO + "infinitiveClause"
    if slot.function is Function.PREDICATIVE:
        if slot.realisation is Realisation.AP:
            return LEXINFO + "predicativeAdjective"
        return LEXINFO + "complement"
    name = _FUNCTION_PROPERTY.get(slot.function)
    return LEXINFO + name if name else SYNSEM + "synArg"


def _iri(base: str, local: str) -> str:
    return base + quote(local, safe="-._~")


def _frame_id(frame: Frame, sense_id: str, number: int) -> str:
    return frame.id or f"{sense_id}.f{number}"


def _add_entry(graph: Any, entry: Entry, lexicon_iri: Any, base: str, language: str) -> None:
    from rdflib import Literal, URIRef
    from rdflib.namespace import RDF

    def node(local: str) -> URIRef:
        return URIRef(_iri(base, local))

    on, ss, li, sk = ONTOLEX, SYNSEM, LEXINFO, SKOS
    subject = node(entry.id)
    graph.add((lexicon_iri, URIRef(LIME + "entry"), subject))
    graph.add((subject, RDF.type, URIRef(on + "LexicalEntry")))
    form = node(f"{entry.id}-form")
    graph.add((subject, URIRef(on + "canonicalForm"), form))
    graph.add((form, RDF.type, URIRef(on + "Form")))
    graph.add((form, URIRef(on + "writtenRep"), Literal(entry.lemma, lang=language)))
    if entry.pos.upper() == "VERB":
        graph.add((subject, URIRef(li + "partOfSpeech"), URIRef(li + "verb")))
    for sense in entry.senses:
        sense_node = node(sense.id)
        graph.add((subject, URIRef(on + "sense"), sense_node))
        graph.add((sense_node, RDF.type, URIRef(on + "LexicalSense")))
        if sense.gloss:
            graph.add((sense_node, URIRef(sk + "definition"), Literal(sense.gloss, lang=language)))
        for example in sense.examples:
            graph.add((sense_node, URIRef(sk + "example"), Literal(example.text, lang=language)))
        arguments = []
        for number, frame in enumerate(sense.frames, 1):
            frame_node = node(_frame_id(frame, sense.id, number))
            graph.add((subject, URIRef(ss + "synBehavior"), frame_node))
            graph.add((frame_node, RDF.type, URIRef(ss + "SyntacticFrame")))
            for position, slot in enumerate(frame.slots, 1):
                argument = node(f"{_frame_id(frame, sense.id, number)}-arg{position}")
                arguments.append(argument)
                graph.add((frame_node, URIRef(_argument_property(slot)), argument))
                graph.add((argument, RDF.type, URIRef(ss + "SyntacticArgument")))
                if slot.optional:
                    graph.add((argument, URIRef(ss + "optional"), Literal(True)))
                if slot.marker:
                    marker = node(f"marker-{language}-{slot.marker}")
                    graph.add((argument, URIRef(ss + "marker"), marker))
                    graph.add((marker, RDF.type, URIRef(on + "LexicalEntry")))
                    marker_form = node(f"marker-{language}-{slot.marker}-form")
                    graph.add((marker, URIRef(on + "canonicalForm"), marker_form))
                    graph.add((marker_form, RDF.type, URIRef(on + "Form")))
                    graph.add(
                        (marker_form, URIRef(on + "writtenRep"),
                         Literal(slot.marker, lang=language))
                    )
        if arguments:
            graph.add((sense_node, RDF.type, URIRef(ss + "OntoMap")))
            graph.add((sense_node, URIRef(ss + "ontoMapping"), sense_node))
            for argument in arguments:
                graph.add((sense_node, URIRef(ss + "ontoCorrespondence"), argument))


def to_graph(lexicon: Lexicon, *, base: str = DEFAULT_BASE) -> Any:
    """The lexicon as an rdflib ``Graph`` (see the module docstring for the mapping)."""
    from rdflib import Graph, Literal, URIRef
    from rdflib.namespace import RDF, RDFS

    graph = Graph()
    for prefix, namespace in (
        ("ontolex", ONTOLEX), ("synsem", SYNSEM), ("lime", LIME), ("lexinfo", LEXINFO),
        ("skos", SKOS),
    ):
        graph.bind(prefix, namespace)
    graph.bind("lex", base)
    language = lexicon.meta.language
    lexicon_iri = URIRef(_iri(base, "lexicon"))
    graph.add((lexicon_iri, RDF.type, URIRef(LIME + "Lexicon")))
    graph.add((lexicon_iri, URIRef(LIME + "language"), Literal(language)))
    graph.add((lexicon_iri, RDFS.label, Literal(lexicon.meta.title, lang=language)))
    for entry in lexicon.entries:
        _add_entry(graph, entry, lexicon_iri, base, language)
    return graph


def to_ontolex(lexicon: Lexicon, *, base: str = DEFAULT_BASE) -> bytes:
    """The lexicon as OntoLex-Lemon Turtle (UTF-8 bytes, deterministic)."""
    data = to_graph(lexicon, base=base).serialize(format="turtle", encoding="utf-8")
    return bytes(data)


def parse_ontolex(data: bytes) -> Any:
    """A Turtle document read into an rdflib ``Graph`` (``ValidationFailed`` if unreadable)."""
    from rdflib import Graph

    from lexbuild.errors import ValidationFailed

    graph = Graph()
    try:
        graph.parse(data=data, format="turtle")
    except Exception as error:  # rdflib raises several unrelated types for bad syntax
        raise ValidationFailed(f"not valid Turtle: {error}") from None
    return graph


def shapes_graph() -> Any:
    """The project's SHACL shapes for its OntoLex-Lemon output (``ontolex_shapes.ttl``)."""
    from rdflib import Graph

    text = resources.files("lexbuild.formats").joinpath(SHAPES_FILE).read_text(encoding="utf-8")
    return Graph().parse(data=text, format="turtle")


def validate_ontolex(data: bytes, *, name: str = "<bytes>") -> Sequence[Any]:
    """SHACL validation of a Turtle document against the project's shapes; [] when valid.

    Findings are ``XmlFinding`` objects (the type every validator returns) with line 0: SHACL
    reports name the focus node, not a line.
    """
    import pyshacl
    from rdflib.namespace import RDF, SH

    from lexbuild.errors import ValidationFailed
    from lexbuild.formats.validate import XmlFinding

    try:
        graph = parse_ontolex(data)
    except ValidationFailed as error:
        return [XmlFinding(str(error), 0, None, None, "Turtle", name)]
    conforms, report, _ = pyshacl.validate(
        graph, shacl_graph=shapes_graph(), inference="none", advanced=False
    )
    if conforms:
        return []
    findings = []
    for result in report.subjects(RDF.type, SH.ValidationResult):
        focus = report.value(result, SH.focusNode)
        path = report.value(result, SH.resultPath)
        message = report.value(result, SH.resultMessage)
        text = f"{message}" + (f" (path {path})" if path is not None else "")
        findings.append(
            XmlFinding(text, 0, str(focus) if focus is not None else None, None,
                       "lexbuild OntoLex-Lemon shapes", name)
        )
    return sorted(findings, key=lambda f: (f.xml_id or "", f.message))


def _write(lexicon: Lexicon, changes: Sequence[str]) -> bytes:
    return to_ontolex(lexicon)


def _validate(data: bytes, context: ValidationContext) -> list[Any]:
    return list(validate_ontolex(data, name=context.name))


# The registration (lexbuild.formats.registry). text/turtle: the W3C Turtle Recommendation
# (2014), section "Media Type and Content Encoding".
FORMAT = OutputFormat(
    name="ontolex",
    title="OntoLex-Lemon",
    suffix=".ontolex.ttl",
    media_type="text/turtle",
    description="OntoLex-Lemon (W3C community report 2016, synsem, LexInfo 3.0) in Turtle",
    write=_write,
    validate=_validate,
)

"""TEI Lex-0 writer and reader (reader: our own exports only).

Supported version: TEI Lex-0 0.9.4 (the published ``TEILex0.rng`` + ``TEILex0.sch``).

Encoding (see ``../shared/encoding/NOTES.md``, a tested study):

* the lexicon is ``TEI[@type="lex-0"]``; the header holds title, editors, edition (``@n`` and
  release date), publisher, licence (``availability`` last in ``publicationStmt``), the corpora
  cited (``sourceDesc/listBibl[@type="corpora"]``), the controlled vocabularies (status, slot
  function, slot realisation) as ``taxonomy``, the object language, and a ``revisionDesc`` with
  one ``change`` for the edition followed by the caller's change-log lines;
* an entry is ``entry[@xml:id][@xml:lang]`` with ``form[@type="lemma"]/orth`` and
  ``gramGrp/gram[@type="pos"]``; a homograph number goes in ``entry/@n``;
* a sense is ``sense[@xml:id][@n][@ana="#status.X"]`` with ``def`` (the gloss) and notes;
* each frame of a sense is a sub-sense ``sense[@xml:id = frame id]`` holding exactly one
  ``gramGrp[@type="frame"]`` (the TEI Lex-0 Schematron allows one gramGrp per parent):
  ``gram[@type="construction"]`` carries the canonical frame string, each slot is
  ``gram[@type="slot"][@n][@xml:id][@ana][@value][@opt]``, corpus frequencies are
  ``usg[@type="frequency"][@value][@corresp]`` pointing at the frame or the slot;
* an example is ``cit[@type="example"][@n = its position in the sense]`` inside the sub-sense of
  its frame (or in the sense when it names none), ``quote`` marks the verb as
  ``ref[@type="oRef"]`` and the argument spans as ``seg[@type="arg"][@subtype="slotN"]``;
  ``@n="start-end"`` gives the character offsets (0-based, end excluded) of each span, so spans
  that cross one another are written as empty ``seg``/``ref`` at their start and still read
  back exactly; the source is ``bibl`` with ``idno[@type="corpus"]`` and
  ``idno[@type="sentence"]`` (``@corresp`` points at the corpus when it is declared).

Not exported: induction provenance, metadata ``retired_ids`` and ``extra_schemas`` (they are
project bookkeeping, kept in the sources). The order of an example's argument spans is read
back in text order.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from lxml import etree

from lexbuild.errors import ExportError, LexbuildError, SourceError, SourceLocation
from lexbuild.formats.fragments import (
    CachedFragmentsConflict,
    EntryItem,
    FragmentCache,
    WrittenDocument,
    entry_items,
    write_entries,
)
from lexbuild.formats.registry import OutputFormat, validate_xml
from lexbuild.formats.xmlsafe import (
    XmlWriter,
    describe_forbidden,
    escape_text,
    forbidden_character,
    inline,
    parse_untrusted,
)
from lexbuild.lexicon.ids import DocumentIds
from lexbuild.lexicon.model import (
    ArgumentSpan,
    Corpus,
    Editor,
    Entry,
    Example,
    Frame,
    Function,
    Lexicon,
    LexiconMeta,
    Realisation,
    Sense,
    SourceRef,
    Status,
)
from lexbuild.lexicon.snapshot import EntryView, SenseView, Snapshot

__all__ = [
    "FORMAT", "SUPPORTED_VERSIONS", "TEI_NS", "TEIError", "is_tei", "read_tei", "tei_snapshot",
    "to_tei", "write_tei",
]

SUPPORTED_VERSIONS = ("0.9.4",)
TEI_NS = "http://www.tei-c.org/ns/1.0"
XML_NS = "http://www.w3.org/XML/1998/namespace"
_T = "{" + TEI_NS + "}"
_XML_ID = "{" + XML_NS + "}id"

#: Prefixes of header ids, so that an editor or corpus id never clashes with an entry id.
EDITOR_PREFIX = "editor."
CORPUS_PREFIX = "corpus."
STATUS_PREFIX = "status."
FUNCTION_PREFIX = "fn."
REALISATION_PREFIX = "real."

FUNCTION_TERMS: dict[Function, str] = {
    Function.SUBJECT: "subject",
    Function.OBJECT: "direct object",
    Function.INDIRECT_OBJECT: "indirect object",
    Function.OBLIQUE: "oblique (prepositional complement)",
    Function.CLAUSAL: "clausal complement",
    Function.PREDICATIVE: "predicative complement",
    Function.REFLEXIVE: "pronominal marker (inherent reflexive clitic)",
}
REALISATION_TERMS: dict[Realisation, str] = {
    Realisation.NP: "noun phrase",
    Realisation.PP: "prepositional phrase",
    Realisation.CLITIC: "clitic pronoun",
    Realisation.CLAUSE: "finite clause",
    Realisation.INFINITIVE: "infinitive",
    Realisation.AP: "adjective phrase",
    Realisation.EXPLETIVE: "expletive (impersonal) subject",
}
_DECLARATION = (
    "Each syntactic frame of a sense is a sub-sense whose xml:id is the frame id, holding exactly "
    "one gramGrp[@type='frame']: gram[@type='construction'] is the frame in lexbuild's canonical "
    "notation; each slot is gram[@type='slot'] with @n = position, @ana = function and "
    "realisation categories, @value = preposition or complementiser, @opt = optional. Corpus "
    "frequencies are usg[@type='frequency']/@value, @corresp pointing at the frame or slot. The "
    "editorial status of a sense is sense/@ana pointing into taxonomy tax.status. In examples, "
    "ref[@type='oRef'] marks the verb and seg[@type='arg'] an argument (@subtype = slot "
    "position, @corresp = slot id); @n gives each span as 0-based character offsets start-end "
    "(end excluded) into the quotation."
)


class TEIError(ExportError):
    """A lexicon cannot be written as TEI Lex-0 (reading raises ``SourceError``)."""


def is_tei(data: bytes) -> bool:
    """True when the root element of ``data`` is a TEI element."""
    from lexbuild.formats.validate import detect_format

    try:
        return detect_format(data) == "tei"
    except LexbuildError:
        return False


# ------------------------------------------------------------------------------------ writer


def _header(out: XmlWriter, meta: LexiconMeta, changes: Sequence[str], ids: DocumentIds) -> None:
    out.open("teiHeader")
    out.open("fileDesc")
    out.open("titleStmt")
    out.leaf("title", meta.title)
    for editor in meta.editors:
        identifier = ids.add(EDITOR_PREFIX + editor.id, f"editor {editor.id!r}")
        out.leaf("editor", editor.name, [("xml:id", identifier)])
    out.close("titleStmt")
    date = meta.release_date.isoformat()
    out.open("editionStmt")
    out.raw(
        inline_open("edition", [("n", str(meta.edition))])
        + escape_text(f"Edition {meta.edition}, released ")
        + inline("date", date, [("when", date)])
        + "</edition>"
    )
    out.close("editionStmt")
    out.open("publicationStmt")
    if meta.publisher:
        out.leaf("publisher", meta.publisher)
    else:  # TEI wants an agency first; the editors (or the title) answer for the work
        names = "; ".join(editor.name for editor in meta.editors) or meta.title
        out.leaf("authority", names)
    out.leaf("date", date, [("when", date)])
    out.leaf("idno", str(meta.edition), [("type", "edition")])
    out.open("availability")
    out.leaf("licence", meta.licence)
    out.close("availability")
    out.close("publicationStmt")
    if meta.description:
        out.open("notesStmt")
        out.leaf("note", meta.description, [("type", "description")])
        out.close("notesStmt")
    if meta.corpora:
        out.open("sourceDesc")
        out.open("listBibl", [("type", "corpora")])
        for corpus in meta.corpora:
            identifier = ids.add(CORPUS_PREFIX + corpus.id, f"corpus {corpus.id!r}")
            out.open("bibl", [("xml:id", identifier)])
            out.leaf("title", corpus.title)
            if corpus.path is not None:
                out.leaf("idno", corpus.path, [("type", "path")])
            if corpus.licence is not None:
                out.leaf("idno", corpus.licence, [("type", "licence")])
            out.close("bibl")
        out.close("listBibl")
        out.close("sourceDesc")
    out.close("fileDesc")
    out.open("encodingDesc")
    out.open("editorialDecl")
    out.leaf("p", _DECLARATION)
    out.close("editorialDecl")
    out.open("classDecl")
    for taxonomy_id, prefix, terms in (
        ("tax.status", STATUS_PREFIX, {status: status.value for status in Status}),
        ("tax.function", FUNCTION_PREFIX, FUNCTION_TERMS),
        ("tax.realisation", REALISATION_PREFIX, REALISATION_TERMS),
    ):
        out.open("taxonomy", [("xml:id", ids.add(taxonomy_id, "a taxonomy"))])
        for key, term in terms.items():
            identifier = ids.add(prefix + key.value, "a taxonomy category")
            out.open("category", [("xml:id", identifier)])
            out.open("catDesc")
            out.leaf("term", term)
            out.close("catDesc")
            out.close("category")
        out.close("taxonomy")
    out.close("classDecl")
    out.close("encodingDesc")
    out.open("profileDesc")
    out.open("langUsage")
    out.leaf("language", meta.language, [("ident", meta.language), ("role", "objectLanguage")])
    out.close("langUsage")
    out.close("profileDesc")
    out.open("revisionDesc")
    identifier = ids.add(f"rev.e{meta.edition}", "the edition's change")
    out.leaf(
        "change",
        f"Edition {meta.edition}",
        [("xml:id", identifier), ("n", str(meta.edition)), ("when", date)],
    )
    for line in changes:
        out.leaf("change", line, [("type", "changeLog")])
    out.close("revisionDesc")
    out.close("teiHeader")


def inline_open(tag: str, attributes: list[tuple[str, str]]) -> str:
    return inline(tag, None, attributes)[:-2] + ">"


@dataclass(frozen=True, slots=True)
class _Span:
    start: int
    end: int
    tag: str  # "ref" or "seg"
    attributes: list[tuple[str, str]]


def _quote(text: str, spans: list[_Span]) -> str:
    """``quote`` with the spans marked inline where they nest, as empty elements where not."""
    size = len(text)
    nested: list[_Span] = []
    empty: list[_Span] = []
    for span in spans:
        (nested if 0 <= span.start < span.end <= size else empty).append(span)
    nested.sort(key=lambda s: (s.start, -s.end))
    # Keep the spans that nest (a forest); a span crossing an open one becomes an empty element.
    children: dict[int, list[int]] = {-1: []}
    stack: list[tuple[int, _Span]] = []
    for index, span in enumerate(nested):
        while stack and stack[-1][1].end <= span.start:
            stack.pop()
        if stack and span.end > stack[-1][1].end:
            empty.append(span)
            continue
        children[stack[-1][0] if stack else -1].append(index)
        children[index] = []
        stack.append((index, span))

    def place(kids: list[int], low: int, high: int, top: bool) -> str:
        items: list[tuple[int, int, _Span, int]] = [
            (nested[k].start, 1, nested[k], k) for k in kids
        ]
        if top:
            items += [(min(max(s.start, 0), size), 0, s, -1) for s in empty]
        items.sort(key=lambda item: (item[0], item[1]))
        parts: list[str] = []
        cursor = low
        for position, kind, span, index in items:
            if position > cursor:
                parts.append(escape_text(text[cursor:position]))
                cursor = position
            if kind == 0:
                parts.append(inline(span.tag, None, span.attributes))
            else:
                parts.append(
                    inline_open(span.tag, span.attributes)
                    + place(children[index], span.start, span.end, False)
                    + f"</{span.tag}>"
                )
                cursor = span.end
        if high > cursor:
            parts.append(escape_text(text[cursor:high]))
        return "".join(parts)

    return "<quote>" + place(children[-1], 0, size, True) + "</quote>"


def _example(
    out: XmlWriter,
    example: Example,
    position: int,
    entry: Entry,
    slot_ids: dict[str, list[str]],
    corpora: set[str],
    ids: DocumentIds,
) -> None:
    attributes = [("type", "example")]
    if example.id:
        attributes.append(("xml:id", ids.add(example.id, f"example {example.id!r}")))
    attributes.append(("n", str(position)))
    if example.frame:
        attributes.append(("corresp", "#" + example.frame))
    out.open("cit", attributes)
    frame_slots = slot_ids.get(example.frame or "", [])
    start, end = example.verb
    spans = [
        _Span(
            start,
            end,
            "ref",
            [("type", "oRef"), ("target", "#" + entry.id), ("n", f"{start}-{end}")],
        )
    ]
    for argument in example.arguments:
        a_start, a_end = argument.span
        span_attributes = [
            ("type", "arg"),
            ("subtype", f"slot{argument.slot}"),
            ("n", f"{a_start}-{a_end}"),
        ]
        if 1 <= argument.slot <= len(frame_slots):
            span_attributes.append(("corresp", "#" + frame_slots[argument.slot - 1]))
        spans.append(_Span(a_start, a_end, "seg", span_attributes))
    out.raw(_quote(example.text, spans))
    if example.source is not None:
        corpus = example.source.corpus
        out.open("bibl", [("corresp", "#" + CORPUS_PREFIX + corpus)] if corpus in corpora else [])
        out.leaf("idno", corpus, [("type", "corpus")])
        out.leaf("idno", example.source.sentence, [("type", "sentence")])
        out.close("bibl")
    out.close("cit")


def _sub_number(sense_number: int, frame_number: int) -> str:
    if frame_number <= 26:
        return f"{sense_number}{chr(ord('a') + frame_number - 1)}"
    return f"{sense_number}.{frame_number}"


def _sense(
    out: XmlWriter, entry: Entry, sense: Sense, number: int, corpora: set[str], ids: DocumentIds
) -> None:
    out.open(
        "sense",
        [
            ("xml:id", ids.add(sense.id, f"sense {sense.id!r}")),
            ("n", str(number)),
            ("ana", "#" + STATUS_PREFIX + sense.status.value),
        ],
    )
    if sense.gloss:
        out.leaf("def", sense.gloss)
    if sense.note is not None:
        out.leaf("note", sense.note, [("type", "editorial")])
    for flag in sense.flags:
        out.leaf("note", flag, [("type", "flag")])
    frame_ids: list[str] = []
    slot_ids: dict[str, list[str]] = {}
    for frame in sense.frames:
        frame_id = ids.add(frame.id or ids.fresh(sense.id, "f"), f"frame {frame.id!r}")
        frame_ids.append(frame_id)
        slot_ids[frame_id] = [f"{frame_id}.a{k}" for k in range(1, len(frame.slots) + 1)]
    by_frame: dict[str, list[tuple[int, Example]]] = {}
    loose: list[tuple[int, Example]] = []
    for x, example in enumerate(sense.examples, start=1):
        if example.frame and example.frame in slot_ids:
            by_frame.setdefault(example.frame, []).append((x, example))
        else:
            loose.append((x, example))
    for f, (frame, frame_id) in enumerate(zip(sense.frames, frame_ids, strict=True), start=1):
        out.open("sense", [("xml:id", frame_id), ("n", _sub_number(number, f))])
        out.open("gramGrp", [("type", "frame")])
        out.leaf("gram", frame.pattern, [("type", "construction")])
        slots = slot_ids[frame_id]
        for k, (slot, slot_id) in enumerate(zip(frame.slots, slots, strict=True), start=1):
            attributes = [
                ("type", "slot"),
                ("xml:id", ids.add(slot_id, f"slot {k} of frame {frame_id!r}")),
                ("n", str(k)),
                (
                    "ana",
                    f"#{FUNCTION_PREFIX}{slot.function.value} "
                    f"#{REALISATION_PREFIX}{slot.realisation.value}",
                ),
            ]
            if slot.marker:
                attributes.append(("value", slot.marker))
            attributes.append(("opt", "true" if slot.optional else "false"))
            out.leaf("gram", str(slot), attributes)
        if frame.frequency is not None:
            count = str(frame.frequency)
            out.leaf(
                "usg",
                count,
                [("type", "frequency"), ("value", count), ("corresp", "#" + frame_id)],
            )
        for slot_id, number_seen in zip(slots, frame.slot_frequencies or (), strict=False):
            count = str(number_seen)
            out.leaf(
                "usg", count, [("type", "frequency"), ("value", count), ("corresp", "#" + slot_id)]
            )
        out.close("gramGrp")
        for x, example in by_frame.get(frame_id, []):
            _example(out, example, x, entry, slot_ids, corpora, ids)
        out.close("sense")
    for x, example in loose:
        _example(out, example, x, entry, slot_ids, corpora, ids)
    out.close("sense")


def _entry(
    out: XmlWriter, entry: Entry, language: str, corpora: set[str], ids: DocumentIds
) -> None:
    attributes = [("xml:id", ids.add(entry.id, f"entry {entry.id!r}")), ("xml:lang", language)]
    if entry.homograph is not None:
        attributes.append(("n", str(entry.homograph)))
    out.open("entry", attributes)
    out.open("form", [("type", "lemma")])
    out.leaf("orth", entry.lemma)
    out.close("form")
    out.open("gramGrp")
    out.leaf("gram", entry.pos, [("type", "pos")])
    out.close("gramGrp")
    if entry.note is not None:
        out.leaf("note", entry.note, [("type", "editorial")])
    for number, sense in enumerate(entry.senses, start=1):
        _sense(out, entry, sense, number, corpora, ids)
    out.close("entry")


def _text_error(value: Any, where: str) -> TEIError:
    dumped = value if isinstance(value, list) else value.model_dump(mode="json")
    detail = describe_forbidden(dumped, where)
    return TEIError(
        f"{detail}: XML 1.0 cannot hold this character; remove it from the sources "
        "(lexbuild check reports it as E202)"
    )


def to_tei(lexicon: Lexicon, *, changes: Sequence[str] = ()) -> bytes:
    """The lexicon as a TEI Lex-0 document (UTF-8 bytes, same input -> same bytes).

    Entries are sorted by id; ``changes`` are change-log lines written as ``change`` elements
    after the edition's own. Raises ``TEIError`` for duplicate ids or characters XML forbids.
    """
    document = write_tei(
        lexicon.meta, entry_items(lexicon.entries), changes=changes, pool=lexicon.all_ids()
    )
    return _encoded(document)


def _encoded(document: WrittenDocument) -> bytes:
    try:
        return document.data()
    except UnicodeEncodeError as error:  # a lone surrogate slipped past the checks above
        raise TEIError(f"text cannot be encoded as UTF-8: {error}") from None


def write_tei(
    meta: LexiconMeta,
    items: Sequence[EntryItem],
    *,
    changes: Sequence[str] = (),
    pool: Iterable[str] = (),
    cache: FragmentCache | None = None,
) -> WrittenDocument:
    """The TEI document in its parts (``lexbuild.formats.fragments``): the header, one
    fragment per entry (reused from ``cache`` when its key is there), the closing.

    ``pool``: every id of the lexicon (``Lexicon.all_ids``), from which generated ids keep
    clear. ``to_tei`` is this with no cache.
    """
    if not items:
        raise TEIError("the lexicon has no entry; a TEI Lex-0 body needs at least one")
    ids = DocumentIds(pool, TEIError)
    out = XmlWriter()
    out.parts.append('<?xml version="1.0" encoding="UTF-8"?>')
    out.open("TEI", [("xmlns", TEI_NS), ("type", "lex-0")])
    mark = out.mark()
    _header(out, meta, list(changes), ids)
    if forbidden_character(out.since(mark)):
        if any(forbidden_character(line) for line in changes):
            raise _text_error(list(changes), "change-log line")
        raise _text_error(meta, "lexicon metadata")
    out.open("text")
    out.open("body")
    corpora = {corpus.id for corpus in meta.corpora}

    def write_one(entry: Entry, main: XmlWriter, tail: XmlWriter, entry_ids: Any) -> None:
        _entry(main, entry, meta.language, corpora, entry_ids)

    try:
        fragments = write_entries(
            out,
            items,
            ids,
            write_one,
            lambda entry: _text_error(entry, f"entry {entry.id}"),
            cache=cache,
            kind=FRAGMENT_KIND,
        )
    except CachedFragmentsConflict:  # the cold write raises the error a cold build raises
        return write_tei(meta, items, changes=changes, pool=pool)
    closing = XmlWriter()
    closing.depth = out.depth
    closing.close("body")
    closing.close("text")
    closing.close("TEI")
    return WrittenDocument("\n".join(out.parts), tuple(fragments), "\n".join(closing.parts))


#: The kind under which TEI entry fragments are cached (``lexbuild.lexicon.build_cache``).
FRAGMENT_KIND = "tei-entry"


# ------------------------------------------------------------------------------------ reader


def _id(element: etree._Element) -> str | None:
    return element.get(_XML_ID)


def _strip(value: str | None, prefix: str) -> str:
    value = (value or "").strip()
    if value.startswith("#"):
        value = value[1:]
    return value[len(prefix) :] if value.startswith(prefix) else value


_SPAN = re.compile(r"(-?[0-9]+)-(-?[0-9]+)")


def _span(value: str | None, where: str) -> tuple[int, int]:
    match = _SPAN.fullmatch(value or "")
    if match is None:
        raise SourceError(f"{where}: @n={value!r} is not 'start-end' character offsets")
    return int(match.group(1)), int(match.group(2))


def _text_of(element: etree._Element | None) -> str:
    return "" if element is None else "".join(element.itertext())


def _read_meta(header: etree._Element) -> LexiconMeta:
    ns = {"t": TEI_NS}

    def first(path: str) -> etree._Element | None:
        found = header.find(path, ns)
        return found

    edition = first("t:fileDesc/t:editionStmt/t:edition")
    date = first("t:fileDesc/t:editionStmt/t:edition/t:date")
    language = first("t:profileDesc/t:langUsage/t:language[@role='objectLanguage']")
    corpora = []
    for bibl in header.iterfind("t:fileDesc/t:sourceDesc/t:listBibl[@type='corpora']/t:bibl", ns):
        path = bibl.find("t:idno[@type='path']", ns)
        licence = bibl.find("t:idno[@type='licence']", ns)
        corpora.append(
            Corpus(
                id=_strip(_id(bibl), CORPUS_PREFIX),
                title=_text_of(bibl.find("t:title", ns)),
                path=None if path is None else _text_of(path),
                licence=None if licence is None else _text_of(licence),
            )
        )
    publisher = first("t:fileDesc/t:publicationStmt/t:publisher")
    description = first("t:fileDesc/t:notesStmt/t:note[@type='description']")
    return LexiconMeta(
        title=_text_of(first("t:fileDesc/t:titleStmt/t:title")),
        language=(language.get("ident") if language is not None else None) or "und",
        edition=int(edition.get("n", "1")) if edition is not None else 1,
        release_date=dt.date.fromisoformat(date.get("when", ""))
        if date is not None
        else dt.date(1970, 1, 1),
        licence=_text_of(first("t:fileDesc/t:publicationStmt/t:availability/t:licence")),
        editors=[
            Editor(id=_strip(_id(editor), EDITOR_PREFIX), name=_text_of(editor))
            for editor in header.iterfind("t:fileDesc/t:titleStmt/t:editor", ns)
        ],
        publisher=_text_of(publisher),
        description=_text_of(description),
        corpora=corpora,
    )


def _read_example(cit: etree._Element) -> tuple[int, Example]:
    ns = {"t": TEI_NS}
    where = f"line {cit.sourceline}: cit"
    quote = cit.find("t:quote", ns)
    verb = quote.find(".//t:ref[@type='oRef']", ns) if quote is not None else None
    arguments = []
    if quote is not None:
        for seg in quote.iterfind(".//t:seg[@type='arg']", ns):
            slot = (seg.get("subtype") or "slot0").removeprefix("slot")
            arguments.append(ArgumentSpan(slot=int(slot), span=_span(seg.get("n"), where)))
    bibl = cit.find("t:bibl", ns)
    source = None
    if bibl is not None:
        source = SourceRef(
            corpus=_text_of(bibl.find("t:idno[@type='corpus']", ns)),
            sentence=_text_of(bibl.find("t:idno[@type='sentence']", ns)),
        )
    frame = _strip(cit.get("corresp"), "") or None
    example = Example(
        id=_id(cit),
        text=_text_of(quote),
        source=source,
        verb=_span(verb.get("n") if verb is not None else None, where),
        frame=frame,
        arguments=arguments,
    )
    return int(cit.get("n", "0")), example


def _read_sense(element: etree._Element) -> Sense:
    ns = {"t": TEI_NS}
    frames = []
    examples = [_read_example(cit) for cit in element.iterfind("t:cit", ns)]
    for sub in element.iterfind("t:sense", ns):
        group = sub.find("t:gramGrp[@type='frame']", ns)
        if group is None:
            continue
        frame_id = _id(sub)
        pattern = _text_of(group.find("t:gram[@type='construction']", ns))
        slot_ids = [_id(gram) for gram in group.iterfind("t:gram[@type='slot']", ns)]
        counts = {
            _strip(usg.get("corresp"), ""): int(usg.get("value", "0"))
            for usg in group.iterfind("t:usg[@type='frequency']", ns)
        }
        slot_counts = [counts[s] for s in slot_ids if s in counts]
        frames.append(
            Frame(
                id=frame_id,
                pattern=pattern,
                frequency=counts.get(frame_id or ""),
                slot_frequencies=slot_counts
                if len(slot_counts) == len(slot_ids) and slot_counts
                else None,
            )
        )
        examples.extend(_read_example(cit) for cit in sub.iterfind("t:cit", ns))
    examples.sort(key=lambda pair: pair[0])
    status = _strip(element.get("ana"), STATUS_PREFIX) or Status.DRAFT.value
    definition = element.find("t:def", ns)
    note = element.find("t:note[@type='editorial']", ns)
    return Sense(
        id=_id(element) or "",
        gloss=_text_of(definition),
        status=Status(status),
        frames=frames,
        examples=[example for _, example in examples],
        note=None if note is None else _text_of(note),
        flags=[_text_of(flag) for flag in element.iterfind("t:note[@type='flag']", ns)],
    )


def _read_entry(element: etree._Element) -> Entry:
    ns = {"t": TEI_NS}
    note = element.find("t:note[@type='editorial']", ns)
    homograph = element.get("n")
    return Entry(
        id=_id(element) or "",
        lemma=_text_of(element.find("t:form[@type='lemma']/t:orth", ns)),
        pos=_text_of(element.find("t:gramGrp/t:gram[@type='pos']", ns)),
        homograph=int(homograph) if homograph is not None else None,
        senses=[_read_sense(sense) for sense in element.iterfind("t:sense", ns)],
        note=None if note is None else _text_of(note),
    )


def read_tei(source: str | Path | bytes) -> Lexicon:
    """Read back a TEI Lex-0 file written by ``to_tei`` (a path, or the document's bytes).

    Parsed safely (no entities, no DTD, no network, size limit). Raises ``SourceError`` when
    the document is not one of ours.
    """
    tree = parse_untrusted(source)
    root = tree.getroot()
    name = "<bytes>" if isinstance(source, bytes) else str(source)
    if root.tag != _T + "TEI":
        raise SourceError(f"{name}: the root element is {root.tag}, not a TEI element")
    ns = {"t": TEI_NS}
    header = root.find("t:teiHeader", ns)
    if header is None:
        raise SourceError(f"{name}: TEI document without teiHeader")
    try:
        meta = _read_meta(header)
        entries = [_read_entry(entry) for entry in root.iterfind("t:text/t:body/t:entry", ns)]
        return Lexicon(meta=meta, entries=entries)
    except (ValueError, KeyError, TypeError, AttributeError, IndexError) as error:
        if isinstance(error, SourceError) and name in str(error):
            raise
        raise SourceError(
            f"{name}: not a TEI Lex-0 export lexbuild can read back: {error}"
        ) from None


def _write(lexicon: Lexicon, changes: Sequence[str]) -> bytes:
    return to_tei(lexicon, changes=changes)


# The registration (lexbuild.formats.registry). application/tei+xml: RFC 6129.
FORMAT = OutputFormat(
    name="tei",
    title="TEI",
    suffix=".tei.xml",
    media_type="application/tei+xml",
    description=f"TEI Lex-0 {SUPPORTED_VERSIONS[-1]}",
    write=_write,
    validate=validate_xml,
)


# ------------------------------------------------------------------------- snapshot reader
# The compared view of a TEI export (lexbuild.lexicon.snapshot), read in one pass without the
# typed model: what makes a diff of two large editions fast (benchmarks/bench_diff.py).

def tei_snapshot(source: str | Path | bytes) -> Snapshot:
    """The compared view of one of our TEI Lex-0 exports, read straight from the XML.

    Parsed with ``xmlsafe.parse_untrusted`` (no entities, no DTD, no network, size limit). It
    reads the same values as ``lexbuild.formats.tei.read_tei`` without building the typed model,
    in one pass over the elements it needs, which is what makes a diff of two large editions fast;
    ``tests/test_diff.py`` checks that both readings agree.
    """
    from lexbuild.formats.xmlsafe import parse_untrusted

    name = "<bytes>" if isinstance(source, bytes) else str(source)
    root = parse_untrusted(source).getroot()
    if root.tag != _T + "TEI":
        raise SourceError(f"the root element is {root.tag}, not a TEI element",
                          SourceLocation(name))
    reader = _TeiWalk(name)
    try:
        for body in root.iterfind(f"{_T}text/{_T}body"):
            reader.walk(body)
    except (ValueError, KeyError, TypeError, AttributeError, IndexError) as error:
        if isinstance(error, SourceError) and name in str(error):
            raise
        raise SourceError(
            f"not a TEI Lex-0 export lexbuild can read back: {error}", SourceLocation(name)
        ) from None
    return reader.entries




def _text(element: Any) -> str:
    if element is None:
        return ""
    if len(element):  # mixed content (an example's quote): every text node, as read_tei does
        return "".join(element.itertext())
    return element.text or ""


def _strip_ref(value: str | None, prefix: str) -> str:
    return (value or "").strip().removeprefix("#").removeprefix(prefix)


class _TeiWalk:
    """One document-order pass over entries, senses, frames and examples (see tei_snapshot)."""

    def __init__(self, name: str) -> None:
        self.name = name
        self.status_prefix = STATUS_PREFIX
        self.entries: Snapshot = {}

    def walk(self, body: Any) -> None:
        t = _T
        entry_tag, sense_tag, cit_tag = t + "entry", t + "sense", t + "cit"
        gram_tag, usg_tag, idno_tag = t + "gram", t + "usg", t + "idno"
        def_tag, orth_tag = t + "def", t + "orth"
        entry: Any = None
        senses: dict[str, SenseView] = {}
        sense: Any = None  # top-level sense element being read
        frames: dict[str, int | None] = {}
        keys: list[str] = []
        frame_id = ""
        pattern: str | None = None
        frequency: int | None = None
        cit: Any = None
        corpus: str | None = None
        sentence: str | None = None
        lemma = ""
        gloss = ""

        def end_cit() -> None:
            nonlocal cit, corpus, sentence
            if cit is not None:
                if corpus is None and sentence is None and cit.find(t + "bibl") is None:
                    keys.append("text:" + _text(cit.find(t + "quote")))
                else:
                    keys.append(f"{corpus or ''}#{sentence or ''}")
            cit, corpus, sentence = None, None, None

        def end_frame() -> None:
            nonlocal pattern, frequency
            if pattern is not None:
                frames.setdefault(pattern, frequency)
            pattern, frequency = None, None

        def end_sense() -> None:
            nonlocal sense, frames, keys, gloss
            end_cit()
            end_frame()
            if sense is not None:
                sense_id = sense.get(_XML_ID) or ""
                status = _strip_ref(sense.get("ana"), self.status_prefix) or Status.DRAFT.value
                senses[sense_id] = SenseView(sense_id, gloss, status, frames, frozenset(keys))
            sense, frames, keys, gloss = None, {}, [], ""

        def end_entry() -> None:
            nonlocal entry, senses, lemma
            end_sense()
            if entry is not None:
                entry_id = entry.get(_XML_ID) or ""
                self.entries[entry_id] = EntryView(entry_id, lemma, senses)
            entry, senses, lemma = None, {}, ""

        for element in body.iter(entry_tag, sense_tag, cit_tag, gram_tag, usg_tag, idno_tag,
                                 def_tag, orth_tag):
            tag = element.tag
            if tag == idno_tag:
                kind = element.get("type")
                if cit is not None and kind == "corpus":
                    corpus = _text(element)
                elif cit is not None and kind == "sentence":
                    sentence = _text(element)
            elif tag == cit_tag:
                end_cit()
                cit = element
            elif tag == gram_tag:
                if element.get("type") == "construction" and sense is not None:
                    pattern = _text(element)
            elif tag == usg_tag:
                if (
                    element.get("type") == "frequency"
                    and _strip_ref(element.get("corresp"), "") == frame_id
                ):
                    frequency = _count(element, self.name)
            elif tag == sense_tag:
                end_cit()
                if element.getparent() is entry:
                    end_sense()
                    sense = element
                else:  # a frame's sub-sense
                    end_frame()
                    frame_id = element.get(_XML_ID) or ""
            elif tag == def_tag:
                if element.getparent() is sense:
                    gloss = _text(element)
            elif tag == orth_tag:
                parent = element.getparent()
                if parent is not None and parent.get("type") == "lemma" and (
                    parent.getparent() is entry
                ):
                    lemma = _text(element)
            else:  # entry
                end_entry()
                entry = element
        end_entry()


def _count(usg: Any, name: str) -> int:
    try:
        return int(usg.get("value", "0"))
    except ValueError:
        raise SourceError(
            f"usg/@value={usg.get('value')!r} is not a whole number",
            SourceLocation(name, usg.sourceline or 0),
        ) from None

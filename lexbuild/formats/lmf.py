"""LMF writer: ISO 24613:2008 Lexical Markup Framework, DTD revision 16.

Supported version: DTD_LMF_REV_16 (``LexicalResource/@dtdVersion`` is fixed to 16).

Encoding (see ``../shared/encoding/NOTES.md``, a tested study):

* ``GlobalInformation`` holds the dictionary's label, edition, release date, licence, publisher
  and editors as ``feat``; ``Lexicon/feat[@att="language"]`` its language (LMF rev. 16 has no
  ``xml:lang`` and no namespace);
* ``LexicalEntry[@id]`` with ``feat partOfSpeech``, ``Lemma/feat writtenForm`` and one ``Sense``
  per sense: ``feat label`` (display number) and ``editorialStatus``, then its ``SenseExample``
  (``feat text``, ``sourceCorpus``, ``sourceSentence``, ``subcategorizationFrame``,
  ``verbPosition`` and ``argumentPosition`` as 0-based ``start-end`` character offsets), then
  the gloss as ``Definition/TextRepresentation``;
* one ``SyntacticBehaviour`` per (sense, frame) pair links the two through the IDREFS
  ``senses`` and ``subcategorizationFrames`` and carries the frame's corpus frequency;
* frames are entry-specific ``SubcategorizationFrame[@id]`` after all entries, with
  ``feat label`` (the canonical frame string), ``LexemeProperty/feat pronominal`` for frames
  with a reflexive clitic, and one ``SyntacticArgument[@id]`` per slot (``position``,
  ``syntacticFunction``, ``syntacticConstituent``, ``introducer``, ``optional``,
  ``frequency``).

Data-category names partOfSpeech, writtenForm, language, label, syntacticFunction,
syntacticConstituent, introducer and optional follow LMF usage (from memory; the DTD does not
constrain them); the others are this project's conventions. All ids are unique in the document.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Any

from lexbuild.errors import ExportError, LexbuildError
from lexbuild.formats.fragments import (
    CachedFragmentsConflict,
    EntryItem,
    FragmentCache,
    WrittenDocument,
    entry_items,
    write_entries,
)
from lexbuild.formats.registry import OutputFormat, validate_xml
from lexbuild.formats.xmlsafe import XmlWriter, describe_forbidden, forbidden_character
from lexbuild.lexicon.ids import DocumentIds
from lexbuild.lexicon.model import Entry, Frame, Function, Lexicon, LexiconMeta, Realisation

__all__ = [
    "DTD_FILE", "DTD_VERSION", "FORMAT", "SUPPORTED_VERSIONS", "LMFError", "is_lmf", "to_lmf",
    "write_lmf",
]

DTD_VERSION = "16"
SUPPORTED_VERSIONS = (DTD_VERSION,)
DTD_FILE = "DTD_LMF_REV_16.dtd"

FUNCTION_NAMES: dict[Function, str] = {
    Function.SUBJECT: "subject",
    Function.OBJECT: "directObject",
    Function.INDIRECT_OBJECT: "indirectObject",
    Function.OBLIQUE: "oblique",
    Function.CLAUSAL: "clausalComplement",
    Function.PREDICATIVE: "predicativeComplement",
    Function.REFLEXIVE: "pronominalMarker",
}
CONSTITUENT_NAMES: dict[Realisation, str] = {
    Realisation.NP: "NP",
    Realisation.PP: "PP",
    Realisation.CLITIC: "clitic",
    Realisation.CLAUSE: "finiteClause",
    Realisation.INFINITIVE: "infinitive",
    Realisation.AP: "AP",
    Realisation.EXPLETIVE: "expletive",
}


class LMFError(ExportError):
    """A lexicon cannot be written as LMF."""


def is_lmf(data: bytes) -> bool:
    """True when the root element of ``data`` is an LMF ``LexicalResource``."""
    from lexbuild.formats.validate import detect_format

    try:
        return detect_format(data) == "lmf"
    except LexbuildError:
        return False


def _feat(out: XmlWriter, att: str, val: str) -> None:
    out.leaf("feat", None, [("att", att), ("val", val)])


def _global(out: XmlWriter, meta: LexiconMeta) -> None:
    out.open("GlobalInformation")
    _feat(out, "label", meta.title)
    _feat(out, "languageCoding", "BCP 47")
    _feat(out, "edition", str(meta.edition))
    _feat(out, "releaseDate", meta.release_date.isoformat())
    _feat(out, "licence", meta.licence)
    if meta.publisher:
        _feat(out, "publisher", meta.publisher)
    if meta.description:
        _feat(out, "description", meta.description)
    for editor in meta.editors:
        _feat(out, "editor", editor.name)
    for corpus in meta.corpora:
        _feat(out, "corpus", f"{corpus.id}: {corpus.title}")
    out.close("GlobalInformation")


def _frame(frames: XmlWriter, frame: Frame, frame_id: str, ids: DocumentIds) -> list[str]:
    frames.open("SubcategorizationFrame", [("id", frame_id)])
    _feat(frames, "label", frame.pattern)
    if any(slot.function is Function.REFLEXIVE for slot in frame.slots):
        frames.open("LexemeProperty")
        _feat(frames, "pronominal", "yes")
        frames.close("LexemeProperty")
    slots = []
    counts = frame.slot_frequencies or []
    for k, slot in enumerate(frame.slots, start=1):
        slot_id = ids.add(f"{frame_id}.a{k}", f"slot {k} of frame {frame_id!r}")
        frames.open("SyntacticArgument", [("id", slot_id)])
        _feat(frames, "position", str(k))
        _feat(frames, "syntacticFunction", FUNCTION_NAMES[slot.function])
        _feat(frames, "syntacticConstituent", CONSTITUENT_NAMES[slot.realisation])
        if slot.marker:
            name = "writtenForm" if slot.function is Function.REFLEXIVE else "introducer"
            _feat(frames, name, slot.marker)
        _feat(frames, "optional", "yes" if slot.optional else "no")
        if k <= len(counts):
            _feat(frames, "frequency", str(counts[k - 1]))
        frames.close("SyntacticArgument")
        slots.append(slot_id)
    frames.close("SubcategorizationFrame")
    return slots


def _entry(
    out: XmlWriter, frames: XmlWriter, entry: Entry, language: str, ids: DocumentIds
) -> None:
    out.open("LexicalEntry", [("id", ids.add(entry.id, f"entry {entry.id!r}"))])
    _feat(out, "partOfSpeech", entry.pos)
    if entry.homograph is not None:
        _feat(out, "homographNumber", str(entry.homograph))
    if entry.note is not None:
        _feat(out, "note", entry.note)
    out.open("Lemma")
    _feat(out, "writtenForm", entry.lemma)
    out.close("Lemma")
    behaviours: list[tuple[str, str, int | None]] = []
    for number, sense in enumerate(entry.senses, start=1):
        out.open("Sense", [("id", ids.add(sense.id, f"sense {sense.id!r}"))])
        _feat(out, "label", str(number))
        _feat(out, "editorialStatus", sense.status.value)
        if sense.note is not None:
            _feat(out, "note", sense.note)
        for flag in sense.flags:
            _feat(out, "flag", flag)
        slot_ids: dict[str, list[str]] = {}
        for frame in sense.frames:
            frame_id = ids.add(frame.id or ids.fresh(sense.id, "f"), f"frame {frame.id!r}")
            slot_ids[frame_id] = _frame(frames, frame, frame_id, ids)
            behaviours.append((sense.id, frame_id, frame.frequency))
        for example in sense.examples:
            example_id = ids.add(example.id or ids.fresh(sense.id, "x"), f"example {example.id!r}")
            out.open("SenseExample", [("id", example_id)])
            _feat(out, "text", example.text)
            if example.source is not None:
                _feat(out, "sourceCorpus", example.source.corpus)
                _feat(out, "sourceSentence", example.source.sentence)
            if example.frame:
                _feat(out, "subcategorizationFrame", example.frame)
            start, end = example.verb
            _feat(out, "verbPosition", f"{start}-{end}")
            frame_slots = slot_ids.get(example.frame or "", [])
            for argument in example.arguments:
                a_start, a_end = argument.span
                slot_name = (
                    frame_slots[argument.slot - 1]
                    if 1 <= argument.slot <= len(frame_slots)
                    else f"slot{argument.slot}"
                )
                _feat(out, "argumentPosition", f"{slot_name}={a_start}-{a_end}")
            out.close("SenseExample")
        if sense.gloss:
            out.open("Definition")
            out.open("TextRepresentation")
            _feat(out, "language", language)
            _feat(out, "writtenForm", sense.gloss)
            out.close("TextRepresentation")
            out.close("Definition")
        out.close("Sense")
    for sense_id, frame_id, frequency in behaviours:
        behaviour_id = ids.add(f"{frame_id}.b", f"the behaviour of frame {frame_id!r}")
        attributes = [
            ("id", behaviour_id),
            ("senses", sense_id),
            ("subcategorizationFrames", frame_id),
        ]
        if frequency is None:
            out.leaf("SyntacticBehaviour", None, attributes)
        else:
            out.open("SyntacticBehaviour", attributes)
            _feat(out, "frequency", str(frequency))
            out.close("SyntacticBehaviour")
    out.close("LexicalEntry")


def _text_error(value: Any, where: str) -> LMFError:
    detail = describe_forbidden(value.model_dump(mode="json"), where)
    return LMFError(
        f"{detail}: XML 1.0 cannot hold this character; remove it from the sources "
        "(lexbuild check reports it as E202)"
    )


def to_lmf(lexicon: Lexicon) -> bytes:
    """The lexicon as an LMF rev. 16 document (UTF-8 bytes, same input -> same bytes).

    Entries are sorted by id. Raises ``LMFError`` for duplicate ids or characters XML forbids.
    """
    document = write_lmf(lexicon.meta, entry_items(lexicon.entries), pool=lexicon.all_ids())
    return document.data()


#: The kind under which LMF entry fragments are cached (``lexbuild.lexicon.build_cache``).
FRAGMENT_KIND = "lmf-entry"


def write_lmf(
    meta: LexiconMeta,
    items: Sequence[EntryItem],
    *,
    pool: Iterable[str] = (),
    cache: FragmentCache | None = None,
) -> WrittenDocument:
    """The LMF document in its parts (``lexbuild.formats.fragments``): each entry's fragment
    holds its ``LexicalEntry`` and, as its tail, its ``SubcategorizationFrame`` elements
    (written after all entries). ``to_lmf`` is this with no cache."""
    if not items:
        raise LMFError("the lexicon has no entry; an LMF Lexicon needs at least one LexicalEntry")
    ids = DocumentIds(pool, LMFError)
    out = XmlWriter()
    out.parts.append('<?xml version="1.0" encoding="UTF-8"?>')
    out.parts.append(f'<!DOCTYPE LexicalResource SYSTEM "{DTD_FILE}">')
    out.open("LexicalResource", [("dtdVersion", DTD_VERSION)])
    mark = out.mark()
    _global(out, meta)
    if forbidden_character(out.since(mark)):
        raise _text_error(meta, "lexicon metadata")
    out.open("Lexicon")
    _feat(out, "language", meta.language)

    def write_one(entry: Entry, main: XmlWriter, frames: XmlWriter, entry_ids: Any) -> None:
        _entry(main, frames, entry, meta.language, entry_ids)

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
        return write_lmf(meta, items, pool=pool)
    closing = XmlWriter()
    closing.depth = out.depth
    closing.close("Lexicon")
    closing.close("LexicalResource")
    return WrittenDocument("\n".join(out.parts), tuple(fragments), "\n".join(closing.parts))


def _write(lexicon: Lexicon, changes: Sequence[str]) -> bytes:
    return to_lmf(lexicon)  # LMF has no change log


# The registration (lexbuild.formats.registry). application/xml: RFC 7303 (LMF has no media
# type of its own).
FORMAT = OutputFormat(
    name="lmf",
    title="LMF",
    suffix=".lmf.xml",
    media_type="application/xml",
    description="LMF (ISO 24613:2008, DTD rev. 16)",
    write=_write,
    validate=validate_xml,
)

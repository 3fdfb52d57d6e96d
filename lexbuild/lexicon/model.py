"""The typed lexicon: the only thing exporters, checks, diff and merge consume.

Strict pydantic models, unknown fields rejected. Field names follow the sources on disk (one
YAML file per entry), so the JSON Schema generated from these classes describes those files.

A frame is written everywhere (sources, diff, reports, TSV) as one canonical line:

    subj:NP obj:NP iobj:PP[à]
    subj:EXPL refl:CLITIC[se] obl:PP[de]
    subj:NP comp:CLAUSE[que]?
    ()                                      (no slot at all)

Each slot is ``function:REALISATION``, then the marker (preposition or complementiser, may hold
spaces: ``obl:PP[à cause de]``) in brackets when there is one, then ``?`` when optional. Slots are
separated by one space. ``parse_frame`` reads it back; ``format_frame`` writes it.
"""

from __future__ import annotations

import datetime as dt
import functools
import re
from enum import StrEnum
from typing import Annotated, Any

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Field,
    PrivateAttr,
    field_validator,
    model_validator,
)

from lexbuild.errors import FrameSyntaxError
from lexbuild.lexicon.ids import is_ncname

__all__ = [
    "ArgumentSpan",
    "Corpus",
    "Editor",
    "Entry",
    "Example",
    "ExtraSchema",
    "Frame",
    "Function",
    "Induction",
    "Lexicon",
    "LexiconMeta",
    "Realisation",
    "Sense",
    "Slot",
    "SourceRef",
    "Status",
    "format_frame",
    "parse_frame",
    "slot_sort_key",
]


class Function(StrEnum):
    """Grammatical function of a valency slot (codes used in the frame string)."""

    SUBJECT = "subj"
    # Ranked second so that a pronominal frame reads like the verb: "subj:NP refl:CLITIC[se] ...".
    REFLEXIVE = "refl"  # inherent reflexive clitic of a pronominal verb
    OBJECT = "obj"  # direct object
    INDIRECT_OBJECT = "iobj"  # dative complement, clitic or à-PP where a profile says so
    OBLIQUE = "obl"  # prepositional complement (argument, not adjunct)
    CLAUSAL = "comp"  # clausal complement: finite clause or infinitive
    PREDICATIVE = "pred"  # predicative complement (xcomp adjective or noun)


class Realisation(StrEnum):
    """How a slot is realised (codes used in the frame string)."""

    NP = "NP"
    PP = "PP"
    CLITIC = "CLITIC"
    CLAUSE = "CLAUSE"  # finite clause, marker = complementiser (que, si) or none
    INFINITIVE = "INF"  # infinitive, marker = de, à or none
    AP = "AP"  # adjective phrase (predicative)
    EXPLETIVE = "EXPL"  # impersonal subject (French "il", English "it"/"there")


#: Realisations that cannot be written without a marker.
NEEDS_MARKER: frozenset[Realisation] = frozenset({Realisation.PP})

_FUNCTION_RANK = {function: rank for rank, function in enumerate(Function)}


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, use_enum_values=False)


def _check_ncname(value: str) -> str:
    if not is_ncname(value):
        raise ValueError(
            f"{value!r} is not an XML NCName: use letters, digits, '-', '_' or '.', and do not "
            "start with a digit, '-' or '.' (lexbuild.lexicon.ids.lemma_to_id makes one from a"
            " lemma)"
        )
    return value


Id = Annotated[str, AfterValidator(_check_ncname)]
Span = Annotated[tuple[int, int], Field(strict=False)]

_BCP47 = re.compile(
    r"^(?:[a-zA-Z]{2,3}(?:-[a-zA-Z]{3}){0,3}|[a-zA-Z]{4,8})"
    r"(?:-[a-zA-Z]{4})?"
    r"(?:-(?:[a-zA-Z]{2}|[0-9]{3}))?"
    r"(?:-(?:[a-zA-Z0-9]{5,8}|[0-9][a-zA-Z0-9]{3}))*"
    r"(?:-[a-wyzA-WYZ0-9](?:-[a-zA-Z0-9]{2,8})+)*"
    r"(?:-x(?:-[a-zA-Z0-9]{1,8})+)?$"
)


def _check_language(value: str) -> str:
    if not _BCP47.match(value):
        raise ValueError(f"{value!r} is not a BCP 47 language tag (e.g. 'fr', 'fr-CA', 'en')")
    return value


LanguageTag = Annotated[str, AfterValidator(_check_language)]


# --------------------------------------------------------------------------- slots and frames


class Slot(_Strict):
    """One valency slot: function, realisation, marker, optional flag."""

    model_config = ConfigDict(frozen=True)

    function: Function
    realisation: Realisation
    marker: str = ""
    optional: bool = False

    @field_validator("marker")
    @classmethod
    def _marker_syntax(cls, value: str) -> str:
        if (
            value != value.strip()
            or "  " in value
            or any(c in "[]" or (c.isspace() and c != " ") for c in value)
        ):
            raise ValueError(
                f"marker {value!r} must be trimmed, on one line, with single spaces and no "
                "brackets"
            )
        return value

    def __str__(self) -> str:
        text = f"{self.function.value}:{self.realisation.value}"
        if self.marker:
            text += f"[{self.marker}]"
        return text + ("?" if self.optional else "")

    def required(self) -> Slot:
        """The same slot with the optional flag cleared (to compare frames by their slots)."""
        return self if not self.optional else self.model_copy(update={"optional": False})


EMPTY_FRAME = "()"
_SLOT_RE = re.compile(
    r"(?P<function>[a-z]+):(?P<realisation>[A-Z]+)(?:\[(?P<marker>[^\[\]\n\r\t]+)\])?(?P<opt>\?)?"
)


# A dictionary repeats a few hundred patterns over thousands of frames; slots are frozen, so
# the parsed tuples can be shared (errors are not cached: they are raised again).
@functools.lru_cache(maxsize=4096)
def parse_frame(text: str) -> tuple[Slot, ...]:
    """Read a canonical frame string back into slots; raises ``FrameSyntaxError``."""
    if text == EMPTY_FRAME:
        return ()
    if not text or text != text.strip():
        raise FrameSyntaxError(
            f"frame {text!r}: expected slots like 'subj:NP obj:NP obl:PP[de]?' separated by "
            f"single spaces, or {EMPTY_FRAME!r} for a frame without slots"
        )
    slots: list[Slot] = []
    position = 0
    while position < len(text):
        match = _SLOT_RE.match(text, position)
        if match is None:
            raise FrameSyntaxError(
                f"frame {text!r}: cannot read a slot at character {position + 1} "
                f"({text[position:position + 12]!r}); a slot is function:REALISATION[marker]?"
            )
        function, realisation = match.group("function"), match.group("realisation")
        try:
            slot = Slot(
                function=Function(function),
                realisation=Realisation(realisation),
                marker=match.group("marker") or "",
                optional=bool(match.group("opt")),
            )
        except ValueError as error:
            raise FrameSyntaxError(
                f"frame {text!r}, slot {match.group(0)!r}: {_slot_error(function, realisation)}"
                if function not in _FUNCTIONS or realisation not in _REALISATIONS
                else f"frame {text!r}, slot {match.group(0)!r}: {error}"
            ) from None
        slots.append(slot)
        position = match.end()
        if position < len(text):
            if text[position] != " " or position + 1 == len(text) or text[position + 1] == " ":
                raise FrameSyntaxError(
                    f"frame {text!r}: slots must be separated by exactly one space "
                    f"(character {position + 1})"
                )
            position += 1
    return tuple(slots)


_FUNCTIONS = {f.value for f in Function}
_REALISATIONS = {r.value for r in Realisation}


def _slot_error(function: str, realisation: str) -> str:
    if function not in _FUNCTIONS:
        return f"unknown function {function!r}; allowed: {', '.join(sorted(_FUNCTIONS))}"
    return f"unknown realisation {realisation!r}; allowed: {', '.join(sorted(_REALISATIONS))}"


def format_frame(slots: tuple[Slot, ...] | list[Slot]) -> str:
    """The canonical one-line string of a sequence of slots."""
    return " ".join(str(slot) for slot in slots) if slots else EMPTY_FRAME


def slot_sort_key(slot: Slot) -> tuple[int, str, str, bool]:
    """Canonical slot order for frames built from a corpus: by function, then form."""
    return (_FUNCTION_RANK[slot.function], slot.realisation.value, slot.marker, slot.optional)


class Frame(_Strict):
    """A valency frame of one sense: ordered slots (as ``pattern``) and corpus frequency."""

    id: Id | None = None
    pattern: str
    frequency: int | None = None
    slot_frequencies: list[int] | None = None

    _slots: tuple[Slot, ...] = PrivateAttr(default=())

    @field_validator("pattern")
    @classmethod
    def _pattern_parses(cls, value: str) -> str:
        try:
            return format_frame(parse_frame(value))
        except FrameSyntaxError as error:
            raise ValueError(error.message) from None

    @model_validator(mode="after")
    def _slot_frequencies_align(self) -> Frame:
        self._slots = parse_frame(self.pattern)
        if self.slot_frequencies is not None and len(self.slot_frequencies) != len(self._slots):
            raise ValueError(
                f"slot_frequencies has {len(self.slot_frequencies)} numbers but the pattern "
                f"{self.pattern!r} has {len(self._slots)} slots: give one per slot, in order"
            )
        return self

    @property
    def slots(self) -> tuple[Slot, ...]:
        return self._slots

    @classmethod
    def from_slots(
        cls,
        slots: tuple[Slot, ...] | list[Slot],
        *,
        frequency: int | None = None,
        slot_frequencies: list[int] | None = None,
        id: str | None = None,
    ) -> Frame:
        return cls(
            id=id,
            pattern=format_frame(tuple(slots)),
            frequency=frequency,
            slot_frequencies=slot_frequencies,
        )


# --------------------------------------------------------------------------------- examples


class SourceRef(_Strict):
    """Where an example comes from: a corpus (file or declared corpus id) and a sentence id."""

    corpus: str
    sentence: str


class ArgumentSpan(_Strict):
    """The characters of an example that realise one slot (1-based position in its frame)."""

    slot: int
    span: Span


class Example(_Strict):
    """A corpus sentence illustrating a sense (and, when known, one of its frames)."""

    id: Id | None = None
    text: str
    source: SourceRef | None = None
    verb: Span
    frame: Id | None = None
    arguments: list[ArgumentSpan] = Field(default_factory=list)


# ----------------------------------------------------------------------------- senses, entries


class Status(StrEnum):
    DRAFT = "draft"
    REVIEWED = "reviewed"
    APPROVED = "approved"
    RETIRED = "retired"


class Induction(_Strict):
    """How the machine proposed a sense: enough to reproduce it and to match it later."""

    cluster_size: int
    threshold: float = Field(strict=False)
    representation: str
    model: str | None = None
    centroid: str | None = None  # key of the centroid in the induction folder's centroid file
    run: str | None = None  # identifier of the induction run


class Sense(_Strict):
    id: Id
    gloss: str = ""
    status: Status = Status.DRAFT
    frames: list[Frame] = Field(default_factory=list)
    examples: list[Example] = Field(default_factory=list)
    note: str | None = None  # the editor's note, never touched by the machine
    flags: list[str] = Field(default_factory=list)  # machine remarks for the editor's attention
    induction: Induction | None = None

    @field_validator("status", mode="before")
    @classmethod
    def _status_from_text(cls, value: Any) -> Any:
        # YAML gives a str; strict mode would otherwise want the enum member itself.
        if isinstance(value, str) and value in Status._value2member_map_:
            return Status(value)
        if isinstance(value, str):
            raise ValueError(
                f"status {value!r} is not one of: {', '.join(s.value for s in Status)}"
            )
        return value


class Entry(_Strict):
    id: Id
    lemma: str
    pos: str = "VERB"
    homograph: int | None = None
    senses: list[Sense] = Field(default_factory=list)
    note: str | None = None

    @field_validator("lemma")
    @classmethod
    def _lemma_trimmed(cls, value: str) -> str:
        if not value or value != value.strip():
            raise ValueError(f"lemma {value!r} must be non-empty without surrounding spaces")
        return value


# ---------------------------------------------------------------------------------- lexicon


class Editor(_Strict):
    id: Id
    name: str


class Corpus(_Strict):
    """A corpus the examples cite (TEI: sourceDesc/listBibl)."""

    id: Id
    title: str
    path: str | None = None
    licence: str | None = None


class ExtraSchema(_Strict):
    """A project customisation applied on top of the published schema of one format."""

    path: str  # relative to the sources folder
    kind: str  # "xsd", "rng" or "sch"
    format: str  # "tei" or "lmf"

    @field_validator("kind")
    @classmethod
    def _known_kind(cls, value: str) -> str:
        if value not in {"xsd", "rng", "sch"}:
            raise ValueError(f"schema kind {value!r} is not one of: xsd, rng, sch")
        return value

    @field_validator("format")
    @classmethod
    def _known_format(cls, value: str) -> str:
        if value not in {"tei", "lmf"}:
            raise ValueError(f"format {value!r} is not one of: tei, lmf")
        return value


class LexiconMeta(_Strict):
    """The metadata file of a dictionary (``lexicon.yaml``)."""

    title: str
    language: LanguageTag
    edition: int = Field(ge=1)
    release_date: dt.date = Field(strict=False)
    licence: str
    editors: list[Editor] = Field(default_factory=list)
    publisher: str = ""
    description: str = ""
    corpora: list[Corpus] = Field(default_factory=list)
    # Ids that left the sources (deleted by hand or merged away): never handed out again.
    retired_ids: list[Id] = Field(default_factory=list)
    extra_schemas: list[ExtraSchema] = Field(default_factory=list)


class Lexicon(_Strict):
    meta: LexiconMeta
    entries: list[Entry] = Field(default_factory=list)

    def entry(self, entry_id: str) -> Entry | None:
        return next((entry for entry in self.entries if entry.id == entry_id), None)

    def all_ids(self) -> set[str]:
        """Every id in use or ever used (retired ids included): the pool never to reuse."""
        ids: set[str] = set(self.meta.retired_ids)
        for entry in self.entries:
            ids.add(entry.id)
            for sense in entry.senses:
                ids.add(sense.id)
                ids.update(frame.id for frame in sense.frames if frame.id)
                ids.update(example.id for example in sense.examples if example.id)
        return ids

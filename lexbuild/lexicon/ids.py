"""Stable XML identifiers for entries, senses, frames and examples.

Every id lexbuild writes must be an XML NCName (TEI ``xml:id``, LMF ``ID``/``IDREF``), unique
across a whole document, and stable across editions.

Entry ids come from lemmas through one reversible mapping (``lemma_to_id`` / ``id_to_lemma``):

* the lemma is NFC-normalised;
* a space becomes ``_``;
* ASCII letters and digits, ``-`` and the Latin letters of U+00C0-U+017E pass unchanged (the
  letters libxml2, which follows the XML 1.0 fourth-edition name tables, accepts in ids);
* any other character (apostrophes, ``.``, ``_``, ``:``, other scripts, emoji, a leading
  space...) becomes ``.`` followed by four lower-case hex digits (``.0027`` for ``'``), or
  ``.u`` and six hex digits beyond the Basic Multilingual Plane;
* if the result cannot start an NCName (a digit, ``-``, ``.``, a combining mark), ``_`` is put in
  front; a lemma cannot start with ``_`` after mapping otherwise, so decoding just drops it.

So ``s'en aller`` -> ``s.0027en_aller``, ``se rendre compte`` -> ``se_rendre_compte``,
``1er`` -> ``_1er``. Sense, frame and example ids extend the entry id with ``.s3``, ``.f2``,
``.x1``: a dot followed by a letter other than a-f never occurs in an entry id, so the
sub-ids never collide with entry ids. Homographs take ``.h2``, ``.h3``...
"""

from __future__ import annotations

import re
import unicodedata
from collections.abc import Iterable

from lexbuild.errors import IdentifierError

__all__ = [
    "DocumentIds",
    "entry_id",
    "example_id",
    "frame_id",
    "id_to_lemma",
    "is_ncname",
    "lemma_to_id",
    "next_free_id",
    "sense_id",
]

# XML 1.0 (fifth edition) NameStartChar ranges, minus ':' (Namespaces in XML: NCName).
_NAME_START_RANGES: tuple[tuple[int, int], ...] = (
    (ord("A"), ord("Z")),
    (ord("_"), ord("_")),
    (ord("a"), ord("z")),
    (0xC0, 0xD6),
    (0xD8, 0xF6),
    (0xF8, 0x2FF),
    (0x370, 0x37D),
    (0x37F, 0x1FFF),
    (0x200C, 0x200D),
    (0x2070, 0x218F),
    (0x2C00, 0x2FEF),
    (0x3001, 0xD7FF),
    (0xF900, 0xFDCF),
    (0xFDF0, 0xFFFD),
    (0x10000, 0xEFFFF),
)
_NAME_EXTRA_RANGES: tuple[tuple[int, int], ...] = (
    (ord("-"), ord("-")),
    (ord("."), ord(".")),
    (ord("0"), ord("9")),
    (0xB7, 0xB7),
    (0x300, 0x36F),
    (0x203F, 0x2040),
)

# Characters an id made from a lemma keeps as they are. Wider than ASCII so that French, Spanish,
# German, Polish... ids stay readable; narrow enough that libxml2 (fourth-edition XML name
# tables) accepts every one of them in an xml:id (tests/test_ids.py checks them all).
_LATIN_EXCLUDED = frozenset({0xD7, 0xF7, 0x132, 0x133, 0x13F, 0x140, 0x149})
_PASS_THROUGH = frozenset(
    [chr(c) for c in range(ord("a"), ord("z") + 1)]
    + [chr(c) for c in range(ord("A"), ord("Z") + 1)]
    + [chr(c) for c in range(0xC0, 0x17F) if c not in _LATIN_EXCLUDED]
)
_PASS_THROUGH_INNER = _PASS_THROUGH | frozenset("0123456789-")
_SPACE = " "
_SPACE_CODE = "_"
_ESCAPE = "."
_ESCAPE_RE = re.compile(r"\.(u[0-9a-f]{6}|[0-9a-f]{4})")


def _in_ranges(code: int, ranges: tuple[tuple[int, int], ...]) -> bool:
    return any(low <= code <= high for low, high in ranges)


def _is_name_start(char: str) -> bool:
    return _in_ranges(ord(char), _NAME_START_RANGES)


def _is_name_char(char: str) -> bool:
    code = ord(char)
    return _in_ranges(code, _NAME_START_RANGES) or _in_ranges(code, _NAME_EXTRA_RANGES)


# Most ids are ASCII: a regex answers for them without walking the Unicode ranges.
_ASCII_NCNAME = re.compile(r"[A-Za-z_][A-Za-z0-9_.\-]*\Z")


def is_ncname(value: str) -> bool:
    """True when ``value`` is an XML NCName (non-empty, no colon, legal first character)."""
    if _ASCII_NCNAME.match(value):
        return True
    return (
        bool(value)
        and ":" not in value
        and _is_name_start(value[0])
        and all(_is_name_char(char) for char in value[1:])
    )


def _escape(char: str) -> str:
    code = ord(char)
    return f"{_ESCAPE}{code:04x}" if code <= 0xFFFF else f"{_ESCAPE}u{code:06x}"


def lemma_to_id(lemma: str) -> str:
    """Map a lemma to an NCName; ``id_to_lemma`` reverses it exactly (on the NFC form)."""
    if not lemma:
        raise IdentifierError("an empty lemma has no identifier")
    text = unicodedata.normalize("NFC", lemma)
    parts: list[str] = []
    for index, char in enumerate(text):
        if char == _SPACE and index > 0:
            parts.append(_SPACE_CODE)
        elif char in _PASS_THROUGH_INNER:
            parts.append(char)
        else:
            parts.append(_escape(char))
    mapped = "".join(parts)
    if mapped[0] not in _PASS_THROUGH:
        mapped = "_" + mapped
    return mapped


def id_to_lemma(identifier: str) -> str:
    """Read back the lemma an entry id was made from (homograph suffix excluded)."""
    if not is_ncname(identifier):
        raise IdentifierError(f"{identifier!r} is not an XML NCName")
    body = identifier[1:] if identifier.startswith("_") else identifier
    out: list[str] = []
    position = 0
    while position < len(body):
        char = body[position]
        if char == _ESCAPE:
            match = _ESCAPE_RE.match(body, position)
            if match is None:
                raise IdentifierError(
                    f"{identifier!r}: '.' at position {position} is not followed by 4 hex digits "
                    "(or 'u' and 6), so it is not an entry id made by lemma_to_id"
                )
            code = match.group(1).lstrip("u")
            out.append(chr(int(code, 16)))
            position = match.end()
        elif char == _SPACE_CODE:
            out.append(_SPACE)
            position += 1
        else:
            out.append(char)
            position += 1
    return "".join(out)


def entry_id(lemma: str, homograph: int | None = None) -> str:
    """The id of an entry: the mapped lemma, plus ``.hN`` for the N-th homograph (N >= 2)."""
    base = lemma_to_id(lemma)
    if homograph is None or homograph == 1:
        return base
    if homograph < 1:
        raise IdentifierError(f"homograph numbers start at 1, got {homograph}")
    return f"{base}.h{homograph}"


def sense_id(entry: str, number: int) -> str:
    return f"{entry}.s{number}"


def frame_id(sense: str, number: int) -> str:
    return f"{sense}.f{number}"


def example_id(sense: str, number: int) -> str:
    return f"{sense}.x{number}"


_SUFFIX_NUMBER = re.compile(r"\.(?P<kind>[sfx])(?P<n>[1-9][0-9]*)$")


def next_free_id(parent: str, kind: str, used: Iterable[str]) -> str:
    """The next ``parent.<kind>N`` id above every number ever used under ``parent``.

    ``used`` must include retired and deleted ids (the lexicon keeps them), so that an id is
    never handed out twice, even after the sense that bore it was retired.
    """
    if kind not in {"s", "f", "x"}:
        raise IdentifierError(f"unknown id kind {kind!r}; expected 's', 'f' or 'x'")
    highest = 0
    prefix_length = len(parent)
    for identifier in used:
        if not identifier.startswith(parent) or len(identifier) <= prefix_length:
            continue
        match = _SUFFIX_NUMBER.match(identifier, prefix_length)
        if match and match.group("kind") == kind:
            highest = max(highest, int(match.group("n")))
    return f"{parent}.{kind}{highest + 1}"


class DocumentIds:
    """Every id written into one document so far: a second use raises ``error``.

    Exporters use it so that a duplicate id becomes a clear export error naming both owners,
    not a file that fails validation later; ``fresh`` hands out ids never used in the lexicon.
    """

    def __init__(self, reserved: Iterable[str], error: type[Exception]) -> None:
        self.owner: dict[str, str] = {}
        self.pool = set(reserved)
        self.error = error

    def add(self, identifier: str, owner: str) -> str:
        previous = self.owner.get(identifier)
        if previous is not None:
            raise self.error(
                f"id {identifier!r} of {owner} is already the id of {previous}: ids must be "
                "unique in the whole document (lexbuild check reports it as E104)"
            )
        self.owner[identifier] = owner
        self.pool.add(identifier)
        return identifier

    def fresh(self, parent: str, kind: str) -> str:
        return next_free_id(parent, kind, self.pool)

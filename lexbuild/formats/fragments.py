"""Documents written one entry at a time, each entry's text reusable from a cache.

The TEI and LMF writers put a header, then every entry (sorted by id), then a closing; an
entry's text depends only on the entry, the object language and the declared corpora. So an
incremental build keeps each entry's text (an ``EntryFragment``) under a content key and writes
only the entries that changed. Both paths run the same code: ``write_entries`` is what
``to_tei`` and ``to_lmf`` call with no cache, so a document built from cached fragments is
byte-identical to a cold build by construction (and ``tests/test_incremental.py`` checks it).

What is never reused from a cache, so that a cache hit cannot hide an error a cold build
reports:

* duplicate ids across the document: the ids every reused entry wrote are checked against
  each other and the rest of the document; a clash sends the document to a cold write (same
  check, same message as a cold build);
* an entry whose text holds a character XML forbids: it raises before anything is stored;
* an entry that needed a generated id (``DocumentIds.fresh``: a frame or example without an
  id): the id depends on every id in the lexicon, so that entry is written afresh every time.
"""

from __future__ import annotations

import struct
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from typing import Any, Protocol

from lexbuild.formats.xmlsafe import XmlWriter, forbidden_character
from lexbuild.lexicon.ids import DocumentIds
from lexbuild.lexicon.model import Entry

__all__ = [
    "CachedFragmentsConflict",
    "EntryFragment",
    "EntryItem",
    "FragmentCache",
    "RecordingIds",
    "WrittenDocument",
    "entry_items",
    "write_entries",
]


@dataclass(frozen=True, slots=True)
class EntryFragment:
    """The text one entry contributes to a document, as UTF-8 bytes from the cache to the
    output (a rebuild never decodes the 176 MB it reuses).

    ``text``: the entry's lines (joined by newlines); ``tail``: lines it contributes after all
    entries (LMF frames), None when it has none; ``id_block``: the ids it wrote, in order, one
    per line; ``key``: the content key it is cached under (None: written afresh, not cached);
    ``scope``: the id every id of the fragment is or extends (``id_scope``), None if none.
    """

    text: bytes | memoryview
    tail: bytes | memoryview | None
    id_block: bytes
    key: str | None = None
    scope: bytes | None = None

    @classmethod
    def written(
        cls, text: str, tail: str | None, ids: Sequence[str], key: str | None = None
    ) -> EntryFragment:
        """A fragment from the text a writer produced (checked for forbidden characters, so
        it encodes)."""
        names = [name.encode("utf-8") for name in ids]
        return cls(
            text.encode("utf-8"),
            None if tail is None else tail.encode("utf-8"),
            b"\n".join(names),
            key,
            id_scope(names),
        )

    @property
    def ids(self) -> tuple[str, ...]:
        return tuple(self.id_block.decode("utf-8").split("\n")) if self.id_block else ()

    def text_bytes(self) -> bytes:
        return bytes(self.text)

    def tail_bytes(self) -> bytes | None:
        return None if self.tail is None else bytes(self.tail)

    def to_bytes(self) -> bytes:
        # A fixed head (mark, length of the ids, length of the tail or -1: none), then the
        # ids, the tail and the text.
        tail = self.tail if self.tail is not None else b""
        scope = self.scope if self.scope is not None else b""
        head = _RECORD_HEAD.pack(
            _RECORD_MARK, len(self.id_block), -1 if self.tail is None else len(tail),
            -1 if self.scope is None else len(scope),
        )
        return b"".join((head, scope, self.id_block, tail, self.text))

    @classmethod
    def from_bytes(cls, data: bytes, key: str | None = None) -> EntryFragment:
        """The fragment ``to_bytes`` wrote; ValueError when ``data`` is not one. Its text and
        tail are views into ``data`` (no copy of the 176 MB a big rebuild reuses)."""
        if len(data) < _RECORD_HEAD.size:
            raise ValueError("not a fragment record")
        mark, id_size, tail_size, scope_size = _RECORD_HEAD.unpack_from(data)
        id_start = _RECORD_HEAD.size + max(scope_size, 0)
        id_end = id_start + id_size
        text_start = id_end + max(tail_size, 0)
        if (mark != _RECORD_MARK or tail_size < -1 or scope_size < -1
                or text_start > len(data)):
            raise ValueError("not a fragment record")
        view = memoryview(data)
        return cls(
            view[text_start:],
            None if tail_size < 0 else view[id_end:text_start],
            data[id_start:id_end],
            key,
            None if scope_size < 0 else data[_RECORD_HEAD.size:id_start],
        )


#: The head of a cached fragment: a mark of the record's layout, then the lengths of the ids,
#: the tail and the scope (-1: none); the scope, ids, tail and text follow.
_RECORD_HEAD = struct.Struct("<2sIii")
_RECORD_MARK = b"f2"


# ------------------------------------------------------------------------------ id scopes
#
# Ids must be unique in a whole document: 200,000 ids in 10,000 entries, checked on every
# rebuild by the writer and again by validation. lexbuild's ids are hierarchical (``agir``,
# ``agir.s1``, ``agir.s1.f1``): when every id of a fragment is its scope P or starts with
# "P.", two fragments can share an id only if one scope is the other or extends it (a
# homograph ``voler.h2`` of ``voler``). So the check runs over one scope per entry, and looks
# at single ids only where scopes meet; a fragment without a scope (ids written by hand in
# another scheme) has its ids checked one by one.


def id_scope(ids: Sequence[bytes]) -> bytes | None:
    """The first id, when every id is it or extends it ("P" or "P.x") and none repeats."""
    if not ids:
        return None
    scope = ids[0]
    below = scope + b"."
    if len(set(ids)) != len(ids):
        return None
    if all(name.startswith(below) for name in ids[1:]):
        return scope
    return None


def _outer_scopes(name: bytes) -> list[bytes]:
    """``name`` and every id it extends: b"a.s1.f1" -> [b"a", b"a.s1", b"a.s1.f1"]."""
    parts = name.split(b".")
    return [b".".join(parts[: k + 1]) for k in range(len(parts))]


def ids_distinct(
    scopes: Sequence[bytes], ids_of: Callable[[int], Iterable[bytes]], others: Sequence[bytes]
) -> bool:
    """True exactly when no id is borne twice by: fragments with these ``scopes``
    (``id_scope``: each one's ids distinct and inside its scope; ``ids_of(k)``: the ids of
    fragment k, asked for only where scopes meet) and the ``others`` ids (fragments without
    a scope, the header), checked one by one."""
    index: dict[bytes, int] = {}
    for k, scope in enumerate(scopes):
        if index.setdefault(scope, k) != k:
            return False  # two fragments bear their scope
    single = set(others)
    if len(single) != len(others):
        return False
    held: dict[int, set[bytes]] = {}

    def bears(k: int, name: bytes) -> bool:
        if k not in held:
            held[k] = set(ids_of(k))
        return name in held[k]

    for k, scope in enumerate(scopes):  # scopes that meet: the outer one's ids inside
        if b"." not in scope:
            continue
        inside = scope + b"."
        for outer in _outer_scopes(scope)[:-1]:
            j = index.get(outer)
            if j is not None and any(
                (name == scope or name.startswith(inside)) and bears(k, name)
                for name in ids_of(j)
            ):
                return False
    for name in single:  # a single id can only be borne by a fragment whose scope it is in
        for outer in _outer_scopes(name):
            j = index.get(outer)
            if j is not None and bears(j, name):
                return False
    return True


class EntryItem(Protocol):
    """One entry as a writer sees it: its id, a content key (None: never cached), the entry."""

    @property
    def id(self) -> str: ...

    @property
    def key(self) -> str | None: ...

    def entry(self) -> Entry: ...


@dataclass(frozen=True, slots=True)
class _Given:
    """An entry already in memory (a cold build)."""

    value: Entry

    @property
    def id(self) -> str:
        return self.value.id

    @property
    def key(self) -> str | None:
        return None

    def entry(self) -> Entry:
        return self.value


def entry_items(entries: Iterable[Entry]) -> list[EntryItem]:
    return [_Given(entry) for entry in entries]


class FragmentCache(Protocol):
    """Where fragments are kept between runs (``lexbuild.lexicon.build_cache.BuildCache``)."""

    def get_many(self, kind: str, keys: Sequence[str]) -> dict[str, bytes]: ...

    def put_many(self, kind: str, items: dict[str, bytes]) -> None: ...


class RecordingIds:
    """A ``DocumentIds`` that notes what one entry adds and whether it asked for a fresh id."""

    def __init__(self, ids: DocumentIds) -> None:
        self.ids = ids
        self.added: list[tuple[str, str]] = []
        self.used_fresh = False

    def add(self, identifier: str, owner: str) -> str:
        found = self.ids.add(identifier, owner)
        self.added.append((identifier, owner))
        return found

    def fresh(self, parent: str, kind: str) -> str:
        self.used_fresh = True
        return self.ids.fresh(parent, kind)


class CachedFragmentsConflict(Exception):
    """Raised inside ``write_entries`` when a document reusing fragments meets an error."""


def _all_distinct(ids: DocumentIds, reused: list[EntryFragment]) -> bool:
    """True when the ids of the ``reused`` fragments are distinct from each other and from
    every id ``ids`` holds (the header's, the entries written afresh)."""
    scoped = [fragment for fragment in reused if fragment.scope is not None]
    blocks = [fragment.id_block for fragment in reused if fragment.scope is None]
    names = b"\n".join(block for block in blocks if block).split(b"\n") if blocks else []
    return ids_distinct(
        [fragment.scope for fragment in scoped if fragment.scope is not None],
        lambda k: scoped[k].id_block.split(b"\n"),
        names + [name.encode("utf-8") for name in ids.owner],
    )


@dataclass(frozen=True, slots=True)
class WrittenDocument:
    """A document in its parts: ``prefix`` + entry texts + entry tails + ``suffix`` (each part
    a block of lines), with the content key of each entry's fragment (None: not cached)."""

    prefix: str
    fragments: tuple[EntryFragment, ...]
    suffix: str

    def parts(self) -> list[bytes | memoryview]:
        """The document's bytes in pieces, to be joined by newlines (the last piece empty:
        the document ends with one)."""
        parts: list[bytes | memoryview] = [self.prefix.encode("utf-8")]
        parts += [fragment.text for fragment in self.fragments]
        parts += [fragment.tail for fragment in self.fragments if fragment.tail is not None]
        if self.suffix:
            parts.append(self.suffix.encode("utf-8"))
        parts.append(b"")
        return parts

    def data(self) -> bytes:
        return b"\n".join(self.parts())


#: Writes one entry: (entry, main writer, tail writer, ids) -> None; raises on bad text.
EntryWriter = Callable[[Entry, XmlWriter, XmlWriter, Any], None]


def write_entries(
    out: XmlWriter,
    items: Sequence[EntryItem],
    ids: DocumentIds,
    write_one: EntryWriter,
    text_error: Callable[[Entry], Exception],
    *,
    cache: FragmentCache | None = None,
    kind: str = "",
) -> list[EntryFragment]:
    """Write ``items`` in id order at the current depth of ``out``; returns their fragments
    (with their tails: LMF puts them after all entries).

    The ids of reused fragments are checked all at once at the end (distinct from each other
    and from the ids of the header and of the entries written afresh), not entry by entry.
    Where that could make a difference (an entry written afresh after reused ones raises,
    or an id is borne twice) it raises ``CachedFragmentsConflict``; the caller then writes
    the document cold, which raises the exact error or writes what a cold build writes.
    Reused ids missing from ``ids`` cannot change an entry written afresh unnoticed: a
    generated id (``DocumentIds.fresh``) that one of them would have blocked is equal to it,
    so it is borne twice and the check sends the document to the cold write.
    """
    ordered = sorted(items, key=lambda item: item.id)  # stable: same order as a cold build
    keys = [item.key for item in ordered if item.key is not None]
    found = cache.get_many(kind, keys) if cache is not None and keys else {}
    fresh: dict[str, bytes] = {}
    fragments = []
    reused: list[EntryFragment] = []  # the fragments reused so far
    for item in ordered:
        cached = found.get(item.key) if item.key is not None else None
        if cached is not None:
            try:
                fragment = EntryFragment.from_bytes(cached, item.key)
            except ValueError:
                pass  # unreadable: written afresh below
            else:
                reused.append(fragment)
                fragments.append(fragment)
                continue
        entry = item.entry()
        recording = RecordingIds(ids)
        main, tail = XmlWriter(), XmlWriter()
        main.depth = tail.depth = out.depth
        try:
            write_one(entry, main, tail, recording)
            text, tail_text = main.text()[:-1], tail.text()[:-1] if tail.parts else None
            if forbidden_character(text) or (tail_text and forbidden_character(tail_text)):
                raise text_error(entry)
        except Exception:
            if reused:
                raise CachedFragmentsConflict from None
            raise
        cacheable = item.key is not None and not recording.used_fresh
        fragment = EntryFragment.written(
            text, tail_text, [name for name, _ in recording.added],
            item.key if cacheable else None,
        )
        if cacheable and item.key is not None:
            fresh[item.key] = fragment.to_bytes()
        fragments.append(fragment)
    if reused and not _all_distinct(ids, reused):
        raise CachedFragmentsConflict  # an id borne twice: the cold write reports it
    if cache is not None and fresh:
        cache.put_many(kind, fresh)
    return fragments

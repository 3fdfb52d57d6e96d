"""Documents written one entry at a time, each entry's text reusable from a cache.

The TEI and LMF writers put a header, then every entry (sorted by id), then a closing; an
entry's text depends only on the entry, the object language and the declared corpora. So an
incremental build keeps each entry's text (an ``EntryFragment``) under a content key and writes
only the entries that changed. Both paths run the same code: ``write_entries`` is what
``to_tei`` and ``to_lmf`` call with no cache, so a document built from cached fragments is
byte-identical to a cold build by construction (and ``tests/test_incremental.py`` checks it).

What is never reused from a cache, so that a cache hit cannot hide an error a cold build
reports:

* duplicate ids across the document: every id an entry wrote is replayed, in document order,
  into the document's ``DocumentIds`` (same check, same message as a cold build);
* an entry whose text holds a character XML forbids: it raises before anything is stored;
* an entry that needed a generated id (``DocumentIds.fresh``: a frame or example without an
  id): the id depends on every id in the lexicon, so that entry is written afresh every time.
"""

from __future__ import annotations

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
    """The text one entry contributes to a document.

    ``text``: the entry's lines (joined by newlines); ``tail``: lines it contributes after all
    entries (LMF frames), None when it has none; ``ids``: the ids it wrote, in order;
    ``key``: the content key it is cached under (None: written afresh, not cached).
    """

    text: str
    tail: str | None
    ids: tuple[str, ...]
    key: str | None = None

    def to_bytes(self) -> bytes:
        # Ids are NCNames and XML text holds no NUL: a newline ends an id, NUL each part.
        tail = "\x01" if self.tail is None else self.tail
        return "\x00".join(("\n".join(self.ids), tail, self.text)).encode("utf-8")

    @classmethod
    def from_bytes(cls, data: bytes, key: str | None = None) -> EntryFragment:
        ids, tail, text = data.decode("utf-8").split("\x00")
        names = tuple(ids.split("\n")) if ids else ()
        return cls(text, None if tail == "\x01" else tail, names, key)


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


#: The owner noted for the ids of a cached entry. It never reaches a message: any error while
#: writing a document that reused fragments sends the document to a cold write, which raises
#: the error with every owner named (``CachedFragmentsConflict``).
_CACHED_OWNER = "an entry reused from the cache"


class CachedFragmentsConflict(Exception):
    """Raised inside ``write_entries`` when a document reusing fragments meets an error."""


def _fits(ids: DocumentIds, names: tuple[str, ...]) -> bool:
    """Add a cached entry's ids when none is taken yet; False (nothing added) otherwise."""
    if ids.owner.keys().isdisjoint(names) and len(set(names)) == len(names):
        ids.owner.update(dict.fromkeys(names, _CACHED_OWNER))
        ids.pool.update(names)
        return True
    return False


@dataclass(frozen=True, slots=True)
class WrittenDocument:
    """A document in its parts: ``prefix`` + entry texts + entry tails + ``suffix`` (each part
    a block of lines), with the content key of each entry's fragment (None: not cached)."""

    prefix: str
    fragments: tuple[EntryFragment, ...]
    suffix: str

    def data(self) -> bytes:
        parts = [self.prefix]
        parts += [fragment.text for fragment in self.fragments]
        parts += [fragment.tail for fragment in self.fragments if fragment.tail is not None]
        if self.suffix:
            parts.append(self.suffix)
        return ("\n".join(parts) + "\n").encode("utf-8")


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

    Raises ``CachedFragmentsConflict`` when an error meets a document that reused cached
    fragments; the caller then writes the document cold, which raises the exact error.
    """
    ordered = sorted(items, key=lambda item: item.id)  # stable: same order as a cold build
    keys = [item.key for item in ordered if item.key is not None]
    found = cache.get_many(kind, keys) if cache is not None and keys else {}
    fresh: dict[str, bytes] = {}
    fragments = []
    reused = False
    for item in ordered:
        cached = found.get(item.key) if item.key is not None else None
        fragment = None
        if cached is not None:
            try:
                fragment = EntryFragment.from_bytes(cached, item.key)
            except ValueError:
                fragment = None  # unreadable: written afresh below
        if fragment is not None and _fits(ids, fragment.ids):
            reused = True
        else:
            if fragment is not None:
                raise CachedFragmentsConflict  # an id clash: the cold write reports it
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
            fragment = EntryFragment(
                text, tail_text, tuple(name for name, _ in recording.added),
                item.key if cacheable else None,
            )
            if cacheable and item.key is not None:
                fresh[item.key] = fragment.to_bytes()
        fragments.append(fragment)
    if cache is not None and fresh:
        cache.put_many(kind, fresh)
    return fragments

"""Incremental builds: ``check``, ``export``, ``validate`` and ``release`` reuse what earlier
runs computed for the entries that did not change.

A ``Build`` is a sources folder read for one command. Each entry file is read as bytes and
hashed; its results are cached (``lexbuild.lexicon.build_cache``) under content keys:

=============== ===========================================================================
kind            key (besides the code fingerprint: tool version + text of the modules)
=============== ===========================================================================
entry           file name, file bytes, bytes of ``lexicon.yaml``: the entry's ids with their
                paths and what the local check rules found
entry-model     file name, file bytes: the typed entry (JSON), when a whole lexicon is needed
tei-entry       file bytes, object language, declared corpus ids: the TEI fragment
lmf-entry       file bytes, object language: the LMF fragment (entry and its frames)
valid-*         fragment text, format, published schemas' checksums: its validation verdict
=============== ===========================================================================

A record is only written for an entry that loaded, and a verdict only for a fragment that
validated: errors are recomputed on every run, so a cache hit never hides one. Whole-document
rules run every time, on what the records keep: duplicate ids across entries (check E104 and
the writers' id registry), pointers from an entry into the header, id uniqueness across the
document (validation). Output is byte-identical to a build without the cache
(``tests/test_incremental.py`` edits sources at random and compares).
"""

from __future__ import annotations

import hashlib
import json
import os
import struct
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from lexbuild.errors import SourceError, SourceLocation
from lexbuild.lexicon.build_cache import BuildCache, code_fingerprint, content_key
from lexbuild.lexicon.checks import (
    Finding,
    Problem,
    choose_rules,
    entry_problems,
    located_findings,
    meta_problems,
)
from lexbuild.lexicon.model import Entry, Lexicon, LexiconMeta
from lexbuild.lexicon.sources import (
    META_FILE,
    FieldPath,
    LoadedLexicon,
    SourceMap,
    entry_files,
    id_paths,
    load_entry_bytes,
    load_meta,
    parse_all_bytes,
)

if TYPE_CHECKING:
    from lexbuild.formats.fragments import WrittenDocument
    from lexbuild.formats.registry import OutputFormat, ValidationContext
    from lexbuild.formats.validate import XmlFinding

__all__ = ["Build", "SourceEntry", "open_build"]

ENTRY_KIND = "entry"
MODEL_KIND = "entry-model"


@dataclass(eq=False)
class SourceEntry:
    """One entry file of a build: its bytes, and what the cache or a parse gave for them."""

    file: Path
    data: bytes
    id: str
    names: list[str]  # every id the entry holds, in ``id_paths`` order
    problems: dict[str, list[Problem]]
    model_key: str
    parsed: Entry | None = None
    digest: str = ""  # sha256 of ``data``
    key: str | None = None  # the fragment key of the document being written
    paths_text: bytes | str | None = None  # the ids' paths as JSON, until asked for
    _ids: list[tuple[str, FieldPath]] | None = None

    @property
    def ids(self) -> list[tuple[str, FieldPath]]:
        """Every id the entry holds with its field path (``sources.id_paths``)."""
        if self._ids is None:
            if self.paths_text is not None:
                paths = [tuple(path) for path in json.loads(self.paths_text)]
                self._ids = list(zip(self.names, paths, strict=True))
            else:
                self._ids = list(id_paths(self.entry()))
        return self._ids

    def entry(self) -> Entry:
        if self.parsed is None:
            self.parsed = load_entry_bytes(self.file, self.data, SourceMap())
        return self.parsed


def _path(value: Sequence[Any]) -> FieldPath:
    return tuple(part for part in value if isinstance(part, str | int))


#: The head of an entry record: a mark of the layout, then the lengths of the entry id, of
#: its ids (one per line: ids are NCNames) and of their paths (JSON); the check rules'
#: problems (JSON) follow. Read without a JSON parse for the common entry with no problem.
_ENTRY_HEAD = struct.Struct("<2sIII")
_ENTRY_MARK = b"e2"
_NO_PROBLEMS = b"{}"


def _record(item: SourceEntry) -> bytes:
    entry_id = item.id.encode("utf-8")
    names = "\n".join(item.names).encode("utf-8")
    paths = json.dumps(
        [list(path) for _, path in item.ids], ensure_ascii=False, separators=(",", ":")
    ).encode("utf-8")
    problems = json.dumps(
        {
            code: [
                [list(p.path), p.message, None if p.first is None else list(p.first)]
                for p in problems
            ]
            for code, problems in item.problems.items()
        },
        ensure_ascii=False,
        separators=(",", ":"),
    ).encode("utf-8")
    head = _ENTRY_HEAD.pack(_ENTRY_MARK, len(entry_id), len(names), len(paths))
    return b"".join((head, entry_id, names, paths, problems))


def _from_record(file: Path, data: bytes, record: bytes, model_key: str) -> SourceEntry | None:
    try:
        mark, id_size, names_size, paths_size = _ENTRY_HEAD.unpack_from(record)
        if mark != _ENTRY_MARK:
            return None
        start = _ENTRY_HEAD.size
        names_start = start + id_size
        paths_start = names_start + names_size
        problems_start = paths_start + paths_size
        if problems_start > len(record):
            return None
        entry_id = record[start:names_start].decode("utf-8")
        block = record[names_start:paths_start].decode("utf-8")
        names = block.split("\n") if block else []
        paths = record[paths_start:problems_start]
        paths.decode("utf-8")  # read (json.loads) only when asked for, but UTF-8 now
        rest = record[problems_start:]
        value = {} if rest == _NO_PROBLEMS else json.loads(rest)
        problems = {
            code: [
                Problem(entry_id, _path(path), message, None if first is None else _path(first))
                for path, message, first in items
            ]
            for code, items in value.items()
        }
    except (ValueError, KeyError, TypeError, AttributeError, struct.error):
        return None  # unreadable record: a miss
    if entry_id != file.stem:
        return None
    return SourceEntry(file, data, entry_id, names, problems, model_key, paths_text=paths)


@dataclass
class Build:
    """A sources folder read for one command, with its cache (None: a cold build)."""

    root: Path
    meta: LexiconMeta
    items: list[SourceEntry]
    source_map: SourceMap
    cache: BuildCache | None
    fingerprint: str
    load_errors: list[SourceError] = field(default_factory=list)
    _lexicon: Lexicon | None = None
    _all_ids: set[str] | None = None
    _held: set[str] | None = None

    # ---------------------------------------------------------------- the typed model

    def lexicon(self) -> Lexicon:
        """The whole typed lexicon (entries from the cache's JSON where it has them)."""
        if self._lexicon is None:
            missing = [item for item in self.items if item.parsed is None]
            found = (
                self.cache.get_many(MODEL_KIND, [item.model_key for item in missing])
                if self.cache is not None and missing
                else {}
            )
            fresh: dict[str, bytes] = {}
            for item in missing:
                record = found.get(item.model_key)
                if record is not None:
                    try:
                        item.parsed = Entry.model_validate_json(record)
                    except ValueError:
                        item.parsed = None
                if item.parsed is None or item.parsed.id != item.id:
                    item.parsed = None
                    fresh[item.model_key] = item.entry().model_dump_json().encode("utf-8")
            if self.cache is not None and fresh:
                self.cache.put_many(MODEL_KIND, fresh)
            self._lexicon = Lexicon.model_construct(
                meta=self.meta, entries=[item.entry() for item in self.items]
            )
        return self._lexicon

    def loaded(self) -> LoadedLexicon:
        return LoadedLexicon(self.lexicon(), self.source_map, self.root)

    def all_ids(self) -> set[str]:
        """``Lexicon.all_ids`` from the ids each entry holds."""
        if self._all_ids is None:
            self._all_ids = self._held_ids() | set(self.meta.retired_ids)
        return self._all_ids

    def _held_ids(self) -> set[str]:
        """Every id some entry holds (one union, shared by ``all_ids`` and check E104)."""
        if self._held is None:
            self._held = set().union(*(item.names for item in self.items))
        return self._held

    # ---------------------------------------------------------------- check

    def check(
        self, *, select: Iterable[str] | None = None, ignore: Iterable[str] = ()
    ) -> list[Finding]:
        """``checks.check_lexicon`` over this build: the same findings, in the same order."""
        chosen = choose_rules(select, ignore)
        found: list[tuple[Any, list[Problem]]] = []
        for rule in chosen:
            if rule.find_ids is not None:
                problems = []
                if self._ids_repeat():  # such rules find nothing where no id repeats
                    summaries = [(item.id, item.ids) for item in self.items]
                    problems = list(rule.find_ids(self.meta, summaries))
            else:
                problems = meta_problems(self.meta, rule)
                for item in self.items:
                    problems += item.problems.get(rule.code, ())
            found.append((rule, problems))
        return located_findings(self.source_map, found)

    def _ids_repeat(self) -> bool:
        total = sum(len(item.names) for item in self.items)
        return len(self._held_ids()) != total

    # ---------------------------------------------------------------- export

    def written(
        self, format_name: str, *, changes: Sequence[str] = (), meta: LexiconMeta | None = None
    ) -> WrittenDocument | None:
        """The TEI or LMF document in its parts, entries reused from the cache; None for a
        format written from the whole typed lexicon (OntoLex-Lemon)."""
        meta = meta or self.meta
        corpora = ",".join(sorted({corpus.id for corpus in meta.corpora}))
        if format_name == "tei":
            from lexbuild.formats.tei import FRAGMENT_KIND, write_tei

            self._keys(FRAGMENT_KIND, meta.language, corpora)
            return write_tei(
                meta, self.items, changes=changes, pool=self.all_ids(), cache=self.cache
            )
        if format_name == "lmf":
            from lexbuild.formats.lmf import FRAGMENT_KIND as LMF_KIND
            from lexbuild.formats.lmf import write_lmf

            self._keys(LMF_KIND, meta.language)
            return write_lmf(meta, self.items, pool=self.all_ids(), cache=self.cache)
        return None

    def _keys(self, kind: str, *context: str) -> None:
        prefix = content_key(self.fingerprint, kind, *context)
        for item in self.items:
            item.key = _keyed(prefix, item.digest)

    def write(
        self,
        output_format: OutputFormat,
        *,
        changes: Sequence[str] = (),
        meta: LexiconMeta | None = None,
    ) -> tuple[bytes, WrittenDocument | None]:
        """The document's bytes, and its parts when it was written entry by entry."""
        document = self.written(output_format.name, changes=changes, meta=meta)
        if document is None:
            lexicon = self.lexicon()
            if meta is not None:
                lexicon = lexicon.model_copy(update={"meta": meta})
            return output_format.write(lexicon, changes), None
        if output_format.name == "tei":
            from lexbuild.formats.tei import _encoded

            return _encoded(document), document
        return document.data(), document

    # ---------------------------------------------------------------- validate

    def validate(
        self,
        output_format: OutputFormat,
        data: bytes,
        document: WrittenDocument | None,
        context: ValidationContext,
    ) -> list[XmlFinding]:
        """``output_format.validate(data, context)``, reusing fragment verdicts (TEI, LMF)."""
        if self.cache is None or document is None:
            return output_format.validate(data, context)
        from lexbuild.formats.validate import validate_written

        return validate_written(
            document,
            output_format.name,
            data=data,
            cache=self.cache,
            fingerprint=self.fingerprint,
            schemas_dir=context.schemas_dir,
            extra_schemas=context.extra_schemas,
            name=context.name,
            source_map=context.source_map,
            base_dir=context.base_dir,
        )


def _paths_of(item: SourceEntry) -> Callable[[], list[tuple[str, FieldPath]]]:
    return lambda: item.ids


def _keyed(prefix: str, digest: str, *rest: str) -> str:
    """A record's key: the content key of what all records of a kind share (fixed length),
    the sha256 of the entry file (fixed length), then anything else (the file name). As
    unique as a hash of all three, without hashing each of 10,000 entries once more."""
    return "".join((prefix, digest, *rest))


def _read_bytes(name: str) -> bytes:
    """The file's bytes (``Path.read_bytes`` without its layers: 10,000 files are read on
    every run); b"" when it cannot be read: the careful path of ``open_build`` reports it."""
    try:
        handle = os.open(name, os.O_RDONLY | getattr(os, "O_BINARY", 0))
    except OSError:
        return b""
    try:
        chunks = []
        while chunk := os.read(handle, 1 << 20):
            chunks.append(chunk)
    except OSError:
        return b""
    finally:
        os.close(handle)
    return chunks[0] if len(chunks) == 1 else b"".join(chunks)


def open_build(
    folder: str | Path,
    *,
    cache: BuildCache | None = None,
    problems: list[SourceError] | None = None,
) -> Build:
    """Read a sources folder like ``sources.load_lexicon`` (same errors, same ``problems``),
    taking each unchanged entry's results from ``cache``."""
    root = Path(folder)
    if not root.is_dir():
        raise SourceError(f"sources folder not found: {root}", SourceLocation(str(root)))
    source_map = SourceMap()
    meta = load_meta(root, source_map)
    meta_bytes = (root / META_FILE).read_bytes()
    fingerprint = code_fingerprint()
    files = entry_files(root)
    contents = [_read_bytes(str(path)) for path in files]
    digests = [hashlib.sha256(data).hexdigest() for data in contents]
    entry_prefix = content_key(fingerprint, ENTRY_KIND, meta_bytes)
    model_prefix = content_key(fingerprint, MODEL_KIND)
    named = list(zip(digests, (path.name for path in files), strict=True))
    keys = [_keyed(entry_prefix, digest, name) for digest, name in named]
    model_keys = [_keyed(model_prefix, digest, name) for digest, name in named]
    found = cache.get_many(ENTRY_KIND, keys) if cache is not None else {}
    reused: dict[int, SourceEntry] = {}
    for index, (path, data, digest, key) in enumerate(
        zip(files, contents, digests, keys, strict=True)
    ):
        record = found.get(key)
        if record is not None:
            item = _from_record(path, data, record, model_keys[index])
            if item is not None:
                item.digest = digest
                reused[index] = item
    missing = [index for index in range(len(files)) if index not in reused]
    parsed = dict(
        zip(missing, parse_all_bytes([(files[i], contents[i]) for i in missing]), strict=True)
    )
    items: list[SourceEntry] = []
    fresh: dict[str, bytes] = {}
    models: dict[str, bytes] = {}
    for index, (path, data, digest, key) in enumerate(
        zip(files, contents, digests, keys, strict=True)
    ):
        model_key = model_keys[index]
        item = reused.get(index)
        if item is None:
            try:
                entry = load_entry_bytes(path, data, source_map, parsed[index])
            except SourceError as error:
                if problems is None:
                    raise
                problems.append(error)
                continue
            pairs = list(id_paths(entry))
            item = SourceEntry(
                path, data, entry.id, [name for name, _ in pairs], entry_problems(meta, entry),
                model_key, entry, _ids=pairs,
            )
            item.digest = digest
            fresh[key] = _record(item)
            models[model_key] = entry.model_dump_json().encode("utf-8")
        else:
            source_map.add_entry_ids(item.id, str(path), item.names, _paths_of(item))
        items.append(item)
    if cache is not None and fresh:
        cache.put_many(ENTRY_KIND, fresh)
        cache.put_many(MODEL_KIND, models)
    return Build(root, meta, items, source_map, cache, fingerprint, list(problems or []))

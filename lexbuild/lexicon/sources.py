"""Read and write the YAML sources of a dictionary, remembering where every value came from.

A sources folder holds ``lexicon.yaml`` (one ``LexiconMeta``) and ``entries/<id>.yaml`` (one
``Entry`` per file). Loading keeps a ``SourceMap`` so that checks and errors can name
``file:line:column``; writing goes through ruamel's round-trip mode so that an editor's comments
and key order survive a machine update.
"""

from __future__ import annotations

import datetime as dt
import functools
import io
import json
import os
import re
import typing
import unicodedata
from collections.abc import Iterator
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field
from enum import Enum
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ValidationError
from ruamel.yaml import YAML
from ruamel.yaml.comments import CommentedMap, CommentedSeq
from ruamel.yaml.error import MarkedYAMLError, YAMLError

from lexbuild._atomic import atomic_write_text
from lexbuild.errors import SourceError, SourceLocation
from lexbuild.lexicon.model import Entry, Lexicon, LexiconMeta

__all__ = [
    "ENTRIES_DIR",
    "META_FILE",
    "FieldPath",
    "LoadedLexicon",
    "SourceMap",
    "dump_entry",
    "dump_meta",
    "entry_json_schema",
    "format_path",
    "id_paths",
    "lexicon_json_schema",
    "load_entry",
    "load_entry_bytes",
    "load_lexicon",
    "load_meta",
    "parse_all_bytes",
    "parse_entry_bytes",
    "schema_text",
    "write_entry",
    "write_meta",
    "write_schemas",
]

META_FILE = "lexicon.yaml"
ENTRIES_DIR = "entries"
ENTRY_SCHEMA_FILE = "lexbuild-entry.schema.json"
LEXICON_SCHEMA_FILE = "lexbuild-lexicon.schema.json"

FieldPath = tuple[str | int, ...]


def format_path(path: FieldPath) -> str:
    """``("senses", 0, "gloss")`` -> ``senses[0].gloss`` (``<root>`` for the empty path)."""
    text = ""
    for part in path:
        text += f"[{part}]" if isinstance(part, int) else (f".{part}" if text else part)
    return text or "<root>"


# ------------------------------------------------------------------------------- source map


@dataclass
class SourceMap:
    """File, line and column of every loaded value, by (entry id, field path).

    Positions of an entry are read lazily: loading uses a fast parser without positions, and
    the first question about an entry re-reads its file with the round-trip parser. Most runs
    ask about a handful of entries (those with findings), so most files are parsed once.
    """

    _files: dict[str, str] = field(default_factory=dict)
    _positions: dict[tuple[str, FieldPath], tuple[int, int]] = field(default_factory=dict)
    _located: set[str] = field(default_factory=set)
    _id_paths: dict[str, tuple[str, FieldPath]] = field(default_factory=dict)
    meta_file: str = META_FILE
    _meta: dict[FieldPath, tuple[int, int]] = field(default_factory=dict)
    _lazy_paths: dict[str, typing.Callable[[], typing.Iterable[tuple[str, FieldPath]]]] = field(
        default_factory=dict
    )

    def add_entry(self, entry_id: str, file: str, node: Any) -> None:
        """Record an entry file already parsed with positions (the round-trip parser)."""
        self._files[entry_id] = file
        self._located.add(entry_id)
        for path, position in _walk_positions(node):
            self._positions[(entry_id, path)] = position
            if path and path[-1] == "id":
                value = _get(node, path)
                if isinstance(value, str):
                    self._id_paths.setdefault(value, (entry_id, path))

    def add_loaded_entry(self, entry: Entry, file: str) -> None:
        """Record an entry loaded without positions; they are read when first asked for."""
        self._files[entry.id] = file
        for identifier, path in id_paths(entry):
            self._id_paths.setdefault(identifier, (entry.id, path))

    def add_entry_ids(
        self,
        entry_id: str,
        file: str,
        names: typing.Iterable[str],
        paths: typing.Callable[[], typing.Iterable[tuple[str, FieldPath]]],
    ) -> None:
        """Record an entry known by its ids alone (an incremental build's cached entry);
        ``paths`` gives each id's path, asked for only when a message needs one."""
        self._files[entry_id] = file
        self._lazy_paths[entry_id] = paths
        for identifier in names:
            self._id_paths.setdefault(identifier, (entry_id, ()))

    def add_meta(self, file: str, node: Any) -> None:
        self.meta_file = file
        self._meta = dict(_walk_positions(node))

    def entry_file(self, entry_id: str) -> str:
        return self._files.get(entry_id, f"{ENTRIES_DIR}/{entry_id}.yaml")

    def _ensure_located(self, entry_id: str) -> None:
        if entry_id in self._located or entry_id not in self._files:
            return
        self._located.add(entry_id)
        file = self._files[entry_id]
        try:
            node = _parse_yaml(Path(file).read_text(encoding="utf-8"), file)
        except (OSError, UnicodeDecodeError, SourceError):
            return  # changed since it was loaded: locations fall back to the file alone
        for path, position in _walk_positions(node):
            self._positions[(entry_id, path)] = position

    def locate(self, entry_id: str, path: FieldPath = ()) -> SourceLocation:
        """Location of a value, or of its nearest known ancestor when it was not written."""
        self._ensure_located(entry_id)
        file = self.entry_file(entry_id)
        for length in range(len(path), -1, -1):
            position = self._positions.get((entry_id, tuple(path[:length])))
            if position is not None:
                return SourceLocation(file, *position)
        return SourceLocation(file)

    def locate_id(self, identifier: str) -> SourceLocation | None:
        """Location of the ``id`` value of an entry, sense, frame or example."""
        found = self._id_paths.get(identifier)
        if found is None:
            return None
        entry_id, path = found
        lazy = self._lazy_paths.get(entry_id)
        if lazy is not None:
            path = next((p for name, p in lazy() if name == identifier), path)
        return self.locate(entry_id, path)

    def meta_location(self, path: FieldPath = ()) -> SourceLocation:
        for length in range(len(path), -1, -1):
            position = self._meta.get(tuple(path[:length]))
            if position is not None:
                return SourceLocation(self.meta_file, *position)
        return SourceLocation(self.meta_file)


def id_paths(entry: Entry) -> Iterator[tuple[str, FieldPath]]:
    """Every id an entry holds (its own, its senses', frames' and examples') with its path."""
    yield entry.id, ("id",)
    for s, sense in enumerate(entry.senses):
        yield sense.id, ("senses", s, "id")
        for f, frame in enumerate(sense.frames):
            if frame.id:
                yield frame.id, ("senses", s, "frames", f, "id")
        for x, example in enumerate(sense.examples):
            if example.id:
                yield example.id, ("senses", s, "examples", x, "id")


def _walk_positions(node: Any, path: FieldPath = ()) -> Iterator[tuple[FieldPath, tuple[int, int]]]:
    # ruamel positions are 0-based; ours are 1-based like every editor.
    if path == () and hasattr(node, "lc"):
        yield (), (node.lc.line + 1, node.lc.col + 1)
    if isinstance(node, CommentedMap):
        for key, value in node.items():
            line, col = node.lc.value(key) if _is_scalar(value) else node.lc.key(key)
            yield (*path, str(key)), (line + 1, col + 1)
            yield from _walk_positions(value, (*path, str(key)))
    elif isinstance(node, CommentedSeq):
        for index, value in enumerate(node):
            line, col = node.lc.item(index)
            yield (*path, index), (line + 1, col + 1)
            yield from _walk_positions(value, (*path, index))


def _is_scalar(value: Any) -> bool:
    return not isinstance(value, CommentedMap | CommentedSeq)


def _get(node: Any, path: FieldPath) -> Any:
    for part in path:
        node = node[part]
    return node


# ------------------------------------------------------------------------------------ load


@dataclass
class LoadedLexicon:
    lexicon: Lexicon
    source_map: SourceMap
    root: Path


def _yaml() -> YAML:
    yaml = YAML(typ="rt")
    yaml.allow_unicode = True
    yaml.width = 4096  # never fold long glosses: a diff should show the changed line only
    yaml.indent(mapping=2, sequence=4, offset=2)
    yaml.preserve_quotes = True
    return yaml


def _read_text(path: Path, shown: str) -> str:
    try:
        if path.stat().st_size > MAX_YAML_BYTES:
            raise SourceError(
                f"file larger than {MAX_YAML_BYTES} bytes: a source file is never this large",
                SourceLocation(shown),
            )
        data = path.read_bytes()
    except FileNotFoundError:
        raise SourceError(f"file not found: {path}", SourceLocation(shown)) from None
    except IsADirectoryError:
        raise SourceError(f"a folder, not a file: {path}", SourceLocation(shown)) from None
    except OSError as error:
        raise SourceError(f"cannot read {path}: {error.strerror}", SourceLocation(shown)) from None
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as error:
        line = data[: error.start].count(b"\n") + 1
        raise SourceError(
            f"not UTF-8 (byte {data[error.start]:#04x} at offset {error.start}); save the file "
            "as UTF-8",
            SourceLocation(shown, line),
        ) from None


def _parse_yaml(text: str, shown: str) -> Any:
    _guard_yaml(text, shown)
    try:
        return _yaml().load(text)
    except MarkedYAMLError as error:
        mark = error.problem_mark or error.context_mark
        location = (
            SourceLocation(shown, mark.line + 1, mark.column + 1) if mark else SourceLocation(shown)
        )
        problem = " ".join(str(part) for part in (error.context, error.problem) if part)
        raise SourceError(f"invalid YAML: {problem or error}", location) from None
    except YAMLError as error:
        raise SourceError(f"invalid YAML: {error}", SourceLocation(shown)) from None


def _plain(node: Any) -> Any:
    """ruamel's commented/styled types -> plain Python values, so strict pydantic accepts them."""
    if isinstance(node, dict):
        return {str(key): _plain(value) for key, value in node.items()}
    if isinstance(node, list):
        return [_plain(value) for value in node]
    if isinstance(node, bool):
        return bool(node)
    if isinstance(node, int):
        return int(node)
    if isinstance(node, float):
        return float(node)
    if isinstance(node, str):
        return str(node)
    return node


_M = typing.TypeVar("_M", bound=BaseModel)


def _validate(
    model: type[_M], node: Any, shown: str, locate: typing.Callable[[FieldPath], SourceLocation]
) -> _M:
    if not isinstance(node, CommentedMap):
        raise SourceError(
            f"expected a mapping of {model.__name__} fields at the top level, got "
            f"{type(node).__name__}",
            SourceLocation(shown, 1, 1),
        )
    try:
        return model.model_validate(_plain(node))
    except ValidationError as error:
        problems = [_describe(model, item, locate) for item in error.errors()]
        problems.sort(key=lambda pair: (pair[0].line, pair[0].column, pair[1]))
        lines = "\n".join(f"  {location}: {text}" for location, text in problems)
        raise SourceError(
            f"{len(problems)} value(s) do not fit the {model.__name__} model:\n{lines}",
            problems[0][0],
        ) from None


def _describe(
    model: type[BaseModel],
    item: Any,
    locate: typing.Callable[[FieldPath], SourceLocation],
) -> tuple[SourceLocation, str]:
    """One pydantic error -> (location, 'field.path: what is wrong; what is allowed')."""
    path: FieldPath = tuple(part for part in item["loc"] if isinstance(part, str | int))
    kind = item["type"]
    if kind == "extra_forbidden":
        allowed = ", ".join(_fields_at(model, path[:-1])) or "none"
        text = f"unknown field {path[-1]!r}; allowed fields here: {allowed}"
    elif kind == "missing":
        text = "required field is missing"
    else:
        given = item.get("input")
        shown_input = "" if isinstance(given, dict | list) else f" (got {given!r})"
        text = f"{item['msg']}{shown_input}"
    return locate(path), f"{format_path(path)}: {text}"


def _fields_at(model: type[BaseModel], path: FieldPath) -> list[str]:
    """Names of the fields of the nested model reached by ``path`` (for 'allowed' hints)."""
    current: Any = model
    for part in path:
        if isinstance(part, int):
            continue
        if not (isinstance(current, type) and issubclass(current, BaseModel)):
            return []
        info = current.model_fields.get(part)
        if info is None:
            return []
        current = _model_in(info.annotation)
    if isinstance(current, type) and issubclass(current, BaseModel):
        return list(current.model_fields)
    return []


def _model_in(annotation: Any) -> Any:
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return annotation
    for arg in typing.get_args(annotation):
        found = _model_in(arg)
        if found is not None:
            return found
    return None


def _load_meta(root: Path, source_map: SourceMap) -> LexiconMeta:
    shown = str(root / META_FILE)
    node = _parse_yaml(_read_text(root / META_FILE, shown), shown)
    source_map.add_meta(shown, node)
    return _validate(LexiconMeta, node, shown, source_map.meta_location)


# --------------------------------------------------------------- fast read-only YAML 1.2 loading
#
# Loading 10,000 entry files with ruamel's round-trip parser takes minutes; PyYAML's libyaml
# loader is ~10x faster but implements YAML 1.1 (``no`` is false, ``010`` is 8). The loader below
# keeps libyaml's speed with the YAML 1.2 core schema resolution that ruamel applies, so both
# read the same values (a test compares them file by file). Positions are not kept: they are
# read again with ruamel only when a message needs them.

# ruamel's YAML 1.2 ints also allow '_' separators and 0b binaries.
_CORE_INT = re.compile(r"^[-+]?(?:0b[01_]+|0o[0-7_]+|0x[0-9a-fA-F_]+|[0-9][0-9_]*)$")
_CORE_FLOAT = re.compile(
    r"^[-+]?(?:\.[0-9]+|[0-9]+(?:\.[0-9]*)?)(?:[eE][-+]?[0-9]+)?$"
    r"|^[-+]?\.(?:inf|Inf|INF)$|^\.(?:nan|NaN|NAN)$"
)
_CORE_BOOL = re.compile(r"^(?:true|True|TRUE|false|False|FALSE)$")
_CORE_NULL = re.compile(r"^(?:~|null|Null|NULL|)$")


def _core_int(loader: Any, node: Any) -> int:
    text = loader.construct_scalar(node).replace("_", "")
    sign = -1 if text.startswith("-") else 1
    digits = text.lstrip("+-")
    base = {"0b": 2, "0o": 8, "0x": 16}.get(digits[:2], 10)
    return sign * int(digits[2:] if base != 10 else digits, base)


def _core_float(loader: Any, node: Any) -> float:
    text = loader.construct_scalar(node).lower()
    return float(text.replace(".inf", "inf").replace(".nan", "nan"))


@functools.cache
def _libyaml_loader() -> Any:
    """A PyYAML libyaml loader with YAML 1.2 core schema resolution, or None without libyaml."""
    try:
        import yaml
    except ImportError:
        return None
    if not getattr(yaml, "__with_libyaml__", False):
        return None

    class CoreLoader(yaml.CSafeLoader):
        pass

    CoreLoader.yaml_implicit_resolvers = {}  # drop the YAML 1.1 resolvers inherited

    for tag, pattern, first in (
        ("tag:yaml.org,2002:bool", _CORE_BOOL, list("tTfF")),
        ("tag:yaml.org,2002:null", _CORE_NULL, ["~", "n", "N", ""]),
        ("tag:yaml.org,2002:int", _CORE_INT, list("-+0123456789")),
        ("tag:yaml.org,2002:float", _CORE_FLOAT, list("-+.0123456789")),
    ):
        CoreLoader.add_implicit_resolver(tag, pattern, first)
    # ruamel resolves timestamps in YAML 1.2 documents too: keep PyYAML's rule for them.
    for first, rules in yaml.CSafeLoader.yaml_implicit_resolvers.items():
        for tag, pattern in rules:
            if tag == "tag:yaml.org,2002:timestamp":
                CoreLoader.add_implicit_resolver(tag, pattern, [first])
    CoreLoader.add_constructor("tag:yaml.org,2002:int", _core_int)
    CoreLoader.add_constructor("tag:yaml.org,2002:float", _core_float)
    return CoreLoader


# ------------------------------------------------------------------------------ input limits
#
# Sources are written by people, sometimes copied from elsewhere: the guard below reads the YAML
# event stream once (libyaml's parser is iterative, so depth cannot exhaust the stack) and refuses
# what would be lost or dangerous when building values: duplicate keys (the last one would win
# silently), tags (``!!python/...``), merge keys (``<<``), anchors and aliases (alias bombs),
# nesting deeper than MAX_YAML_DEPTH, numbers longer than MAX_NUMBER_CHARS and files over
# MAX_YAML_BYTES. The limits are stated in the README ("Limits on input").

#: Largest YAML source file read (bytes); an entry file is a few kilobytes.
MAX_YAML_BYTES = 16 * 1024 * 1024
#: Deepest nesting of mappings and sequences (the model needs 6).
MAX_YAML_DEPTH = 64
#: Longest number written as a plain scalar (characters).
MAX_NUMBER_CHARS = 64


def _event_parser(text: str) -> Iterator[Any]:
    loader = _libyaml_loader()
    if loader is not None:
        import yaml

        return yaml.parse(text, Loader=loader)
    return YAML(typ="safe", pure=True).parse(text)


def _guard_yaml(text: str, shown: str, *, build: bool = False) -> Any:
    """Raise ``SourceError`` (file, line, column) on YAML constructs sources may not use.

    With ``build``, also return the document's plain values, made from the same events (what
    ``_fast_load`` returns, without parsing the text a second time); None otherwise.
    """
    builder = _ValueBuilder() if build else None

    def where(event: Any) -> SourceLocation:
        mark = event.start_mark
        return SourceLocation(shown, mark.line + 1, mark.column + 1)

    # One frame per open collection: for a mapping, {key: line} and whether a key comes next.
    frames: list[tuple[dict[str, int], list[bool]] | None] = []
    documents = 0
    try:
        for event in _event_parser(text):
            kind = type(event).__name__
            if kind in ("StreamStartEvent", "StreamEndEvent", "DocumentEndEvent"):
                continue
            if kind == "DocumentStartEvent":
                documents += 1
                if documents > 1:
                    raise SourceError(
                        "more than one YAML document (a second '---'): one document per file",
                        where(event),
                    )
                continue
            if kind == "AliasEvent" or getattr(event, "anchor", None):
                raise SourceError(
                    "anchors and aliases (&name, *name) are not allowed in sources: write the "
                    "value out in full",
                    where(event),
                )
            if getattr(event, "tag", None) and kind != "MappingEndEvent":
                raise SourceError(
                    f"YAML tag {event.tag!r} is not allowed in sources: remove it (values are "
                    "plain text, numbers, lists and mappings)",
                    where(event),
                )
            if kind in ("MappingEndEvent", "SequenceEndEvent"):
                frames.pop()
                _after_node(frames)
                if builder is not None:
                    builder.close()
                continue
            parent = frames[-1] if frames else None
            in_key = parent is not None and parent[1][0]
            if kind == "ScalarEvent":
                _check_scalar(event, where)
                if in_key and parent is not None:
                    _check_key(event, parent[0], where)
                _after_node(frames)
                if builder is not None:
                    builder.scalar(event)
                continue
            # MappingStartEvent or SequenceStartEvent
            if in_key:
                raise SourceError(
                    "a mapping key must be plain text, not a list or a mapping", where(event)
                )
            if len(frames) >= MAX_YAML_DEPTH:
                raise SourceError(
                    f"nesting deeper than {MAX_YAML_DEPTH} levels: sources never need this",
                    where(event),
                )
            frames.append(({}, [True]) if kind == "MappingStartEvent" else None)
            if builder is not None:
                builder.open({} if kind == "MappingStartEvent" else [])
    except SourceError:
        raise
    except MarkedYAMLError as error:  # ruamel's parser, without libyaml
        mark = error.problem_mark or error.context_mark
        location = SourceLocation(shown, mark.line + 1, mark.column + 1) if mark else None
        raise SourceError(f"invalid YAML: {error.problem or error}", location) from None
    except Exception as error:  # PyYAML's MarkedYAMLError: same fields, another class
        mark = getattr(error, "problem_mark", None) or getattr(error, "context_mark", None)
        location = (
            SourceLocation(shown, mark.line + 1, mark.column + 1) if mark else SourceLocation(shown)
        )
        problem = getattr(error, "problem", None) or str(error)
        raise SourceError(f"invalid YAML: {problem}", location) from None
    return None if builder is None else builder.root


_NO_KEY = object()


class _ValueBuilder:
    """Plain values from a YAML event stream, resolved like ``_libyaml_loader``'s loader does.

    The guard refuses what would make this differ from composing and constructing (anchors,
    tags, merge keys, duplicate keys, collections as keys), so only plain scalars need
    resolving; a measured 40-60% of the loading time was the second parse and PyYAML's
    constructor, which this skips.
    """

    def __init__(self) -> None:
        self.root: Any = None
        self._open: list[Any] = []  # the collections being filled, innermost last
        self._keys: list[Any] = []  # per open collection: the key waiting for its value
        self._loader = _resolving_loader()

    def _attach(self, value: Any) -> None:
        if not self._open:
            self.root = value
            return
        container = self._open[-1]
        if isinstance(container, list):
            container.append(value)
        elif self._keys[-1] is _NO_KEY:
            self._keys[-1] = value
        else:
            container[self._keys[-1]] = value
            self._keys[-1] = _NO_KEY

    def scalar(self, event: Any) -> None:
        value = event.value
        if event.implicit[0]:  # a plain scalar: resolved by the YAML 1.2 core rules
            import yaml

            tag = self._loader.resolve(yaml.ScalarNode, value, event.implicit)
            if tag != _STR_TAG:
                node = yaml.ScalarNode(tag, value, event.start_mark, event.end_mark, event.style)
                value = self._loader.yaml_constructors[tag](self._loader, node)
        self._attach(value)

    def open(self, container: dict[Any, Any] | list[Any]) -> None:
        self._attach(container)
        self._open.append(container)
        self._keys.append(_NO_KEY)

    def close(self) -> None:
        self._open.pop()
        self._keys.pop()


_STR_TAG = "tag:yaml.org,2002:str"


@functools.cache
def _resolving_loader() -> Any:
    """One instance of the core-schema loader, used only for its stateless resolver and scalar
    constructors."""
    return _libyaml_loader()("")


def _guarded_load(text: str, shown: str) -> Any:
    """``_guard_yaml`` then ``_fast_load``, in one parse where libyaml is there."""
    if _libyaml_loader() is None:
        _guard_yaml(text, shown)
        return _fast_load(text)
    return _guard_yaml(text, shown, build=True)


def _after_node(frames: list[tuple[dict[str, int], list[bool]] | None]) -> None:
    # A complete node in a mapping alternates key and value.
    if frames and frames[-1] is not None:
        flag = frames[-1][1]
        flag[0] = not flag[0]


def _check_scalar(event: Any, where: typing.Callable[[Any], SourceLocation]) -> None:
    value = event.value
    if (
        not event.style
        and len(value) > MAX_NUMBER_CHARS
        and (_CORE_INT.match(value) or _CORE_FLOAT.match(value))
    ):
        raise SourceError(
            f"number of {len(value)} characters (more than {MAX_NUMBER_CHARS}): quote it if it "
            "is text",
            where(event),
        )


def _check_key(
    event: Any, seen: dict[str, int], where: typing.Callable[[Any], SourceLocation]
) -> None:
    key = event.value
    line = event.start_mark.line + 1
    if key == "<<" and not event.style:
        raise SourceError(
            "merge keys ('<<') are not allowed in sources: write the keys out", where(event)
        )
    if key in seen:
        raise SourceError(
            f"duplicate key {key!r} (first at line {seen[key]}, again at line {line}): only "
            "one value would be kept; remove or merge one of them",
            where(event),
        )
    seen[key] = line


def _fast_load(text: str) -> Any:
    loader = _libyaml_loader()
    if loader is None:
        return YAML(typ="safe").load(text)
    import yaml

    return yaml.load(text, Loader=loader)  # a subclass of the safe loader


def _read_fast(path: Path) -> Any:
    """Plain data of an entry file, or None when it needs the careful path (errors, encoding)."""
    try:
        if path.stat().st_size > MAX_YAML_BYTES:
            return None
        text = path.read_bytes().decode("utf-8")
        return _guarded_load(text, str(path))
    except Exception:  # any problem (PyYAML's errors included): the careful path reports it
        return None


def _load_entry(path: Path, source_map: SourceMap, data: Any = None) -> Entry:
    if data is None:
        data = _read_fast(path)
    entry: Entry | None = None
    if isinstance(data, dict):
        try:
            entry = Entry.model_validate(data)
        except ValidationError:
            entry = None
    if entry is not None and entry.id == path.stem:
        source_map.add_loaded_entry(entry, str(path))
        return _nfc_lemma(entry)
    # Re-read with positions, to report the problem at its line.
    return _load_entry_located(path, _read_text(path, str(path)), source_map)


def _load_entry_located(path: Path, text: str, source_map: SourceMap) -> Entry:
    shown = str(path)
    node = _parse_yaml(text, shown)
    key = path.stem  # the file name is the id: locate errors before the id is known valid
    source_map.add_entry(key, shown, node)
    entry = _validate(Entry, node, shown, lambda field_path: source_map.locate(key, field_path))
    if entry.id != key:
        raise SourceError(
            f"entry id {entry.id!r} does not match the file name: rename the file to "
            f"{entry.id}.yaml or change the id to {key!r}",
            source_map.locate(key, ("id",)),
        )
    return _nfc_lemma(entry)


def _nfc_lemma(entry: Entry) -> Entry:
    """Lemmas are NFC-normalised once, here at reading (and in corpus occurrences), so that a
    decomposed lemma from another source compares equal to the composed one."""
    lemma = unicodedata.normalize("NFC", entry.lemma)
    return entry if lemma == entry.lemma else entry.model_copy(update={"lemma": lemma})


def parse_entry_bytes(path: Path, data: bytes) -> Any:
    """The plain data of an entry file's bytes, or None when it needs the careful path."""
    if len(data) > MAX_YAML_BYTES:
        return None
    try:
        text = data.decode("utf-8")
        return _guarded_load(text, str(path))
    except Exception:  # any problem: the careful path reports it
        return None


def _parse_pair(pair: tuple[Path, bytes]) -> Any:
    return parse_entry_bytes(*pair)


def parse_all_bytes(pairs: list[tuple[Path, bytes]]) -> list[Any]:
    """``parse_entry_bytes`` over many files, spread over processes from PARALLEL_FILES on."""
    workers = min(os.cpu_count() or 1, 8)
    if len(pairs) < PARALLEL_FILES or workers < 2:
        return [parse_entry_bytes(path, data) for path, data in pairs]
    with ProcessPoolExecutor(max_workers=workers) as pool:
        return list(pool.map(_parse_pair, pairs, chunksize=64))


_UNPARSED = object()


def load_entry_bytes(
    path: Path, data: bytes, source_map: SourceMap, parsed: Any = _UNPARSED
) -> Entry:
    """Load an entry file from its bytes, already read (an incremental build hashed them, so
    what it keeps under their hash must come from them, not from a second read). ``parsed``:
    what ``parse_entry_bytes`` gave for them, when it ran already."""
    if parsed is _UNPARSED:
        parsed = parse_entry_bytes(path, data)
    entry: Entry | None = None
    if isinstance(parsed, dict):
        try:
            entry = Entry.model_validate(parsed)
        except ValidationError:
            entry = None
    if entry is not None and entry.id == path.stem:
        source_map.add_loaded_entry(entry, str(path))
        return _nfc_lemma(entry)
    if len(data) > MAX_YAML_BYTES:
        _read_text(path, str(path))  # raises the size error
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        text = _read_text(path, str(path))  # raises the located encoding error
    return _load_entry_located(path, text, source_map)


def load_meta(root: Path, source_map: SourceMap) -> LexiconMeta:
    """Load ``lexicon.yaml`` of a sources folder, its positions recorded in ``source_map``."""
    return _load_meta(root, source_map)


def load_entry(path: str | Path) -> Entry:
    """Load one entry file on its own; raises ``SourceError`` naming file, line and field."""
    return _load_entry(Path(path), SourceMap())


def entry_files(root: Path) -> list[Path]:
    folder = root / ENTRIES_DIR
    if not folder.is_dir():
        return []
    # glob("*.yaml")'s choice (no hidden file), by one scandir: 5x faster on 10,000 files
    names = sorted(
        entry.name for entry in os.scandir(folder)
        if entry.name.endswith(".yaml") and not entry.name.startswith(".")
    )
    return [folder / name for name in names]


def load_lexicon(folder: str | Path, *, problems: list[SourceError] | None = None) -> LoadedLexicon:
    """Load ``lexicon.yaml`` and ``entries/*.yaml``; raises ``SourceError`` naming the place.

    With a ``problems`` list, an entry file that does not load is skipped and its error appended
    instead, so that a checker can report every bad file at once (the metadata file must load).
    """
    root = Path(folder)
    if not root.is_dir():
        raise SourceError(f"sources folder not found: {root}", SourceLocation(str(root)))
    source_map = SourceMap()
    meta = _load_meta(root, source_map)
    files = entry_files(root)
    entries = []
    for path, data in zip(files, _read_all(files), strict=True):
        try:
            entries.append(_load_entry(path, source_map, data))
        except SourceError as error:
            if problems is None:
                raise
            problems.append(error)
    return LoadedLexicon(Lexicon(meta=meta, entries=entries), source_map, root)


#: From this many entry files on, YAML parsing is spread over processes (measured on 2 cores:
#: parsing is ~85% of loading; validation and locations stay in this process).
PARALLEL_FILES = 1000


def _read_all(files: list[Path]) -> list[Any]:
    workers = min(os.cpu_count() or 1, 8)
    if len(files) < PARALLEL_FILES or workers < 2:
        return [_read_fast(path) for path in files]
    with ProcessPoolExecutor(max_workers=workers) as pool:
        return list(pool.map(_read_fast, files, chunksize=64))


# ----------------------------------------------------------------------------------- write


_FLOW_MODELS = frozenset({"SourceRef", "ArgumentSpan"})  # short records read best on one line


def _to_node(value: Any) -> Any:
    """A model value -> ruamel node in model field order, without None/empty defaults."""
    if isinstance(value, BaseModel):
        node = CommentedMap()
        for name, info in type(value).model_fields.items():
            item = getattr(value, name)
            if item is None or (item in ("", [], ()) and item == info.get_default(
                call_default_factory=True
            )):
                continue
            node[name] = _to_node(item)
        if type(value).__name__ in _FLOW_MODELS:
            node.fa.set_flow_style()
        return node
    if isinstance(value, tuple):  # spans
        seq = CommentedSeq(_to_node(item) for item in value)
        seq.fa.set_flow_style()
        return seq
    if isinstance(value, list):
        return CommentedSeq(_to_node(item) for item in value)
    if isinstance(value, Enum):
        return value.value
    if isinstance(value, dt.date):
        return value
    return value


def _dump(node: Any) -> str:
    buffer = io.StringIO()
    _yaml().dump(node, buffer)
    return buffer.getvalue()


def dump_entry(entry: Entry) -> str:
    """The YAML text of a new entry file."""
    return _dump(_to_node(entry))


def dump_meta(meta: LexiconMeta) -> str:
    return _dump(_to_node(meta))


def _same(old: Any, new: Any) -> bool:
    return _plain(old) == _plain(new)


def _merge_map(old: CommentedMap, new: CommentedMap) -> CommentedMap:
    """Apply ``new`` onto ``old`` in place: unchanged keys keep their comments and order."""
    for key in [key for key in old if key not in new]:
        if _plain(old[key]) not in ("", [], {}, None):  # an empty value written out stays
            del old[key]
    for key, value in new.items():
        if key in old:
            old[key] = _merge_value(old[key], value)
        else:
            old[key] = value  # appended: ``new`` is in model field order
    return old


def _merge_seq(old: CommentedSeq, new: CommentedSeq) -> CommentedSeq:
    if _is_flow(new) or (not _is_flow(old) and len(old) == 0):
        return old if _same(old, new) else new
    for index, value in enumerate(new):
        if index < len(old):
            old[index] = _merge_value(old[index], value)
        else:
            old.append(value)
    while len(old) > len(new):
        del old[len(old) - 1]
    return old


def _is_flow(node: Any) -> bool:
    return bool(getattr(node, "fa", None) is not None and node.fa.flow_style())


def _merge_value(old: Any, new: Any) -> Any:
    if isinstance(old, CommentedMap) and isinstance(new, CommentedMap):
        if "id" in old and "id" in new and old["id"] != new["id"]:
            return new  # another object now sits here: its comments belong to the old one
        return _merge_map(old, new)
    if isinstance(old, CommentedSeq) and isinstance(new, CommentedSeq):
        return _merge_seq(old, new)
    return old if type(_plain(old)) is type(_plain(new)) and _same(old, new) else new


def _write_node(path: Path, new: CommentedMap) -> None:
    if path.is_file():
        shown = str(path)
        old = _parse_yaml(_read_text(path, shown), shown)
        if isinstance(old, CommentedMap):
            new = _merge_map(old, new)
    atomic_write_text(path, _dump(new))


def write_entry(folder: str | Path, entry: Entry) -> Path:
    """Write or update ``entries/<id>.yaml``, keeping comments and order of unchanged keys."""
    path = Path(folder) / ENTRIES_DIR / f"{entry.id}.yaml"
    _write_node(path, _to_node(entry))
    return path


def write_meta(folder: str | Path, meta: LexiconMeta) -> Path:
    path = Path(folder) / META_FILE
    _write_node(path, _to_node(meta))
    return path


# ----------------------------------------------------------------------------- JSON Schema


def entry_json_schema() -> dict[str, Any]:
    """JSON Schema of one ``entries/<id>.yaml`` file."""
    return _with_header(Entry.model_json_schema(), "lexbuild entry")


def lexicon_json_schema() -> dict[str, Any]:
    """JSON Schema of ``lexicon.yaml``."""
    return _with_header(LexiconMeta.model_json_schema(), "lexbuild lexicon metadata")


def _with_header(schema: dict[str, Any], title: str) -> dict[str, Any]:
    return {"$schema": "https://json-schema.org/draft/2020-12/schema", **schema, "title": title}


def schema_text(schema: dict[str, Any]) -> str:
    """The file form of a schema: sorted keys, indent 2, trailing newline (stable diffs)."""
    return json.dumps(schema, indent=2, sort_keys=True, ensure_ascii=False) + "\n"


def write_schemas(output: str | Path) -> list[Path]:
    """Regenerate both schema files in ``output``; returns their paths."""
    folder = Path(output)
    written = []
    for name, schema in (
        (ENTRY_SCHEMA_FILE, entry_json_schema()),
        (LEXICON_SCHEMA_FILE, lexicon_json_schema()),
    ):
        atomic_write_text(folder / name, schema_text(schema))
        written.append(folder / name)
    return written


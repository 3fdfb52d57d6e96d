"""CoNLL-U reading (streaming) and writing.

Types are fixed here so that every stage can rely on them; the reader fills them.
"""

from __future__ import annotations

import glob as _glob
import gzip
import lzma
import operator
import re
import zlib
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import BinaryIO, Literal

from lexbuild.errors import CorpusError, SourceLocation

__all__ = [
    "Sentence",
    "Token",
    "format_sentence",
    "iter_sentences",
    "read_sentences",
    "resolve_paths",
    "write_conllu",
]


@dataclass(frozen=True, slots=True)
class Token:
    """One syntactic word (CoNLL-U line with an integer ID)."""

    id: int
    form: str
    lemma: str
    upos: str
    xpos: str
    feats: str  # raw FEATS column ('_' when empty)
    head: int  # 0 for the root
    deprel: str  # full relation with subtype, e.g. 'obl:arg'
    deps: str
    misc: str
    line: int = 0  # 1-based line in the file it came from


@dataclass(frozen=True, slots=True)
class Sentence:
    """One sentence: its syntactic words (multiword-token ranges and empty nodes set apart)."""

    id: str  # sent_id, or '<file stem>.<n>' when the file gives none (n counts from 1)
    text: str  # '# text', or the forms joined following SpaceAfter=No
    tokens: tuple[Token, ...]
    source: str = ""  # the file it came from
    line: int = 0  # 1-based line of its first line in that file
    metadata: tuple[tuple[str, str], ...] = ()  # '# key = value' comments, in order
    multiword: tuple[tuple[int, int, str, str], ...] = ()  # (first id, last id, form, misc)
    empty_nodes: tuple[str, ...] = field(default=())  # raw lines of empty nodes (8.1 ...)


# ------------------------------------------------------------------------------------ reader


OnError = Literal["raise", "skip"]
PathLike = str | Path
_SUFFIXES = (".conllu", ".conllu.gz", ".conllu.xz")
_NCOLS = 10


def resolve_paths(
    paths: PathLike | Iterable[PathLike], *, suffixes: tuple[str, ...] | None = None
) -> list[Path]:
    """Files in reading order: files as given, folders' files sorted, globs sorted.

    In a folder, only names ending with one of ``suffixes`` are taken (default: CoNLL-U,
    plain or compressed).
    """
    wanted = _SUFFIXES if suffixes is None else suffixes
    if isinstance(paths, str | Path):
        paths = [paths]
    files: list[Path] = []
    for item in paths:
        if not str(item).strip():
            # Path("") is the current folder: an empty argument must not read it silently.
            raise CorpusError("empty corpus path given")
        path = Path(item)
        if path.is_dir():
            # Sorted so that ids and outputs do not depend on the file system's order.
            files.extend(
                sorted(p for p in path.iterdir() if p.is_file() and p.name.endswith(wanted))
            )
        elif path.exists():
            files.append(path)
        elif _glob.has_magic(str(item)):
            matches = sorted(Path(p) for p in _glob.glob(str(item)) if Path(p).is_file())
            if not matches:
                raise CorpusError(f"no file matches {str(item)!r}")
            files.extend(matches)
        else:
            raise FileNotFoundError(f"corpus file {str(item)!r} not found")
    return files


def _open_binary(path: Path) -> BinaryIO:
    # Compression is chosen by suffix; both modules stream, so memory stays constant.
    if path.suffix == ".gz":
        return gzip.open(path, "rb")  # type: ignore[return-value]
    if path.suffix == ".xz":
        return lzma.open(path, "rb")  # type: ignore[return-value]
    return path.open("rb")


def _stem(path: Path) -> str:
    name = path.name
    for suffix in (".gz", ".xz"):
        name = name.removesuffix(suffix)
    return Path(name).stem


class _Bad(Exception):
    """A defect found while building one sentence (turned into a CorpusError with location)."""

    def __init__(self, message: str, line: int, column: int = 0) -> None:
        super().__init__(message)
        self.message = message
        self.line = line
        self.column = column


#: Names of the ten columns, for messages (CoNLL-U specification, universaldependencies.org).
FIELDS = ("ID", "FORM", "LEMMA", "UPOS", "XPOS", "FEATS", "HEAD", "DEPREL", "DEPS", "MISC")
# Only FORM, LEMMA and MISC may contain spaces (the CoNLL-U specification).
_NO_SPACE = (0, 3, 4, 5, 6, 7, 8)
# Ids and heads: ASCII digits without leading zeros; 9 digits at most (a billion words).
_NUMBER = r"[1-9][0-9]{0,8}"
_RANGE_ID = re.compile(rf"({_NUMBER})-({_NUMBER})\Z")
_EMPTY_ID = re.compile(rf"(0|{_NUMBER})\.({_NUMBER})\Z")
_DIGITS = "(ASCII digits, no leading zero, 9 at most)"
_HEAD = re.compile(rf"(?:0|{_NUMBER})\Z")
# Control characters have no place in a field; a carriage return would break TSV output.
_CONTROL = re.compile(r"[\x00-\x08\x0a-\x1f\x7f]")
# The same, searched once over a whole sentence joined by line feeds (one call, not one a line).
_CONTROL_IN_BLOCK = re.compile(r"[\x00-\x08\x0b-\x1f\x7f]")
_second = operator.itemgetter(1)


def _column(cols: list[str], index: int) -> int:
    """1-based column where field ``index`` starts on its line."""
    return sum(len(col) + 1 for col in cols[:index]) + 1


def _field_defect(cols: list[str], line: str, lineno: int) -> _Bad | None:
    """Empty fields, control characters, spaces where the format forbids them (or None)."""
    for index, col in enumerate(cols):
        if not col:
            return _Bad(f"field {FIELDS[index]} is empty (write '_')", lineno, _column(cols, index))
    control = _CONTROL.search(line)
    if control is not None:
        index = line.count("\t", 0, control.start())
        return _Bad(
            f"field {FIELDS[index]} contains the control character {control.group()!r}",
            lineno,
            control.start() + 1,
        )
    if " " in line:
        for index in _NO_SPACE:
            if " " in cols[index]:
                return _Bad(
                    f"field {FIELDS[index]} contains a space (only FORM, LEMMA and MISC may)",
                    lineno,
                    _column(cols, index),
                )
    return None


def _join_text(tokens: tuple[Token, ...], multiword: tuple[tuple[int, int, str, str], ...]) -> str:
    """Surface text from forms, using multiword tokens' forms and honouring SpaceAfter=No."""
    ranges = {first: (last, form, misc) for first, last, form, misc in multiword}
    parts: list[str] = []
    index = 0
    while index < len(tokens):
        token = tokens[index]
        if token.id in ranges:
            last, form, misc = ranges[token.id]
            index += last - token.id + 1
        else:
            form, misc = token.form, token.misc
            index += 1
        parts.append(form)
        if "SpaceAfter=No" not in misc:
            parts.append(" ")
    return "".join(parts).rstrip(" ")


def _check_tree(tokens: list[Token]) -> None:
    """Raise _Bad on a head out of range, no root or two, or a cycle (each in O(n))."""
    n = len(tokens)
    root: Token | None = None
    for token in tokens:
        if token.head > n:
            raise _Bad(
                f"field HEAD: head {token.head} of word {token.id} is out of range 0..{n}",
                token.line,
            )
        if token.head == token.id:
            raise _Bad(f"field HEAD: word {token.id} is its own head (cycle)", token.line)
        if token.head == 0:
            if root is not None:
                raise _Bad(
                    f"field HEAD: a second root (words {root.id} and {token.id} have head 0; "
                    "a tree has exactly one)",
                    token.line,
                )
            root = token
    if root is None:
        raise _Bad("field HEAD: no word has head 0 (no root)", tokens[0].line)
    # state: 0 unseen, 1 on the current path, 2 known to reach the root.
    state = [0] * (n + 1)
    state[0] = 2
    for start in range(1, n + 1):
        path: list[int] = []
        node = start
        while state[node] == 0:
            state[node] = 1
            path.append(node)
            node = tokens[node - 1].head
        if state[node] == 1:  # back on the current path: the cycle is its tail from node
            cycle = sorted(path[path.index(node) :])
            raise _Bad(
                f"field HEAD: words {cycle} form a cycle of heads", tokens[cycle[0] - 1].line
            )
        for visited in path:
            state[visited] = 2


def _parse_word(cols: list[str], lineno: int, expected: int) -> Token:
    ident = cols[0]
    if _HEAD.match(ident) is None or ident == "0":
        raise _Bad(f"field ID: word id {ident!r} is not an integer {_DIGITS}", lineno, 1)
    if int(ident) != expected:
        raise _Bad(f"field ID: word id {ident} out of sequence (expected {expected})", lineno, 1)
    head = cols[6]
    if _HEAD.match(head) is None:
        raise _Bad(
            f"field HEAD: head {head!r} of word {ident} is not an integer {_DIGITS}",
            lineno,
            _column(cols, 6),
        )
    return Token(
        expected,
        cols[1],
        cols[2],
        cols[3],
        cols[4],
        cols[5],
        int(head),
        cols[7],
        cols[8],
        cols[9],
        lineno,
    )


def _build(block: list[tuple[int, str]], stem: str, number: int, source: str) -> Sentence:
    """One sentence from its (line number, text) lines; raises _Bad on a defect.

    Checked against the CoNLL-U specification (universaldependencies.org/format.html): ten
    non-empty fields, word ids 1, 2, 3 ... in ASCII digits, multiword ranges of two words or
    more placed just before their first word, empty nodes ``i.j`` just after word ``i`` with
    ``j`` counting from 1 and no HEAD or DEPREL, exactly one root, no cycle.
    """
    metadata: list[tuple[str, str]] = []
    tokens: list[Token] = []
    multiword: list[tuple[int, int, str, str]] = []
    empty: list[str] = []
    covered = 0  # last word id covered by a multiword range so far
    range_line = 0
    last_empty = (0, 0)
    if _CONTROL_IN_BLOCK.search("\n".join(map(_second, block))) is not None:
        for lineno, line in block:  # comments may hold anything but line breaks
            if line[0] == "#" and "\r" in line:
                # A lone carriage return would end the line for other readers and in our output.
                raise _Bad("carriage return inside a comment line", lineno, line.index("\r") + 1)
            if line[0] != "#" and _CONTROL.search(line) is not None:
                cols = line.split("\t")
                if len(cols) != _NCOLS:
                    raise _Bad(
                        f"expected {_NCOLS} tab-separated columns, found {len(cols)}", lineno
                    )
                raise _field_defect(cols, line, lineno) or _Bad("control character", lineno)
    for lineno, line in block:
        if line[0] == "#":
            key, sep, value = line[1:].partition("=")
            metadata.append((key.strip(), value.strip()) if sep else (key.strip(), ""))
            continue
        cols = line.split("\t")
        if len(cols) != _NCOLS:
            raise _Bad(f"expected {_NCOLS} tab-separated columns, found {len(cols)}", lineno)
        # An empty field is two tabs in a row, or a tab at either end (substring tests are fast).
        if "\t\t" in line or line[0] == "\t" or line[-1] == "\t" or " " in line:
            defect = _field_defect(cols, line, lineno)
            if defect is not None:
                raise defect
        ident = cols[0]
        head = cols[6]
        expected = len(tokens) + 1
        if (
            ident == str(expected)
            and len(head) < 10
            and head.isdecimal()
            and head.isascii()
            and (head[0] != "0" or head == "0")
        ):  # the common case, inlined: a word
            tokens.append(
                Token(
                    expected,
                    cols[1],
                    cols[2],
                    cols[3],
                    cols[4],
                    cols[5],
                    int(head),
                    cols[7],
                    cols[8],
                    cols[9],
                    lineno,
                )
            )
        elif "-" in ident:
            found = _RANGE_ID.match(ident)
            if found is None:
                raise _Bad(f"field ID: multiword range {ident!r} is malformed", lineno, 1)
            first, last = int(found.group(1)), int(found.group(2))
            if last <= first:
                raise _Bad(
                    f"field ID: multiword range {ident!r} must span two words or more", lineno, 1
                )
            if first != expected or first <= covered:
                raise _Bad(
                    f"field ID: multiword range {ident!r} must come just before word {first} "
                    "and not overlap another range",
                    lineno,
                    1,
                )
            covered, range_line = last, lineno
            multiword.append((first, last, cols[1], cols[9]))
        elif "." in ident:
            found = _EMPTY_ID.match(ident)
            if found is None:
                raise _Bad(f"field ID: empty node id {ident!r} is malformed", lineno, 1)
            whole, part = int(found.group(1)), int(found.group(2))
            previous = last_empty[1] if last_empty[0] == whole else 0
            if whole != len(tokens) or part != previous + 1:
                raise _Bad(
                    f"field ID: empty node {ident!r} must follow word {whole} "
                    f"(numbered {whole}.1, {whole}.2 ...)",
                    lineno,
                    1,
                )
            if head != "_" or cols[7] != "_":
                raise _Bad(
                    f"field HEAD: empty node {ident!r} must have '_' in HEAD and DEPREL",
                    lineno,
                    _column(cols, 6),
                )
            last_empty = (whole, part)
            empty.append(line)
        else:
            tokens.append(_parse_word(cols, lineno, expected))
    if not tokens:
        raise _Bad("sentence has no words", block[0][0])
    if covered > len(tokens):
        raise _Bad(
            f"field ID: a multiword range ends at word {covered}, past the last word {len(tokens)}",
            range_line,
            1,
        )
    _check_tree(tokens)
    meta = dict(metadata)
    words = tuple(tokens)
    mwt = tuple(multiword)
    return Sentence(
        id=meta.get("sent_id") or f"{stem}.{number}",
        text=meta["text"] if "text" in meta else _join_text(words, mwt),
        tokens=words,
        source=source,
        line=block[0][0],
        metadata=tuple(metadata),
        multiword=mwt,
        empty_nodes=tuple(empty),
    )


def _iter_blocks(path: Path) -> Iterator[tuple[list[tuple[int, str]], _Bad | None]]:
    """Blank-line separated blocks of (line number, text), with an encoding defect if any."""
    with _open_binary(path) as handle:
        yield from blocks_of_lines(enumerate(handle, 1))


def blocks_of_lines(
    numbered: Iterable[tuple[int, bytes]],
) -> Iterator[tuple[list[tuple[int, str]], _Bad | None]]:
    """Blank-line separated blocks of (line number, text) from numbered raw lines, each with
    its first encoding defect; shared by the whole-file and the byte-range readers."""
    block: list[tuple[int, str]] = []
    defect: _Bad | None = None
    for lineno, raw in numbered:
        try:
            line = raw.decode("utf-8")
        except UnicodeDecodeError as error:
            if defect is None:
                defect = _Bad(f"not valid UTF-8 (byte {error.start + 1})", lineno)
            line = raw.decode("utf-8", errors="replace")
        if lineno == 1 and line.startswith("\ufeff"):
            line = line[1:]  # a byte-order mark is tolerated, not part of the data
        line = line.rstrip("\r\n")
        if line.strip():
            block.append((lineno, line))
        elif block:
            yield block, defect
            block, defect = [], None
    if block:
        yield block, defect


_UNREADABLE = (EOFError, zlib.error, lzma.LZMAError, OSError)


def _read_blocks(path: Path) -> Iterator[tuple[list[tuple[int, str]], _Bad | None]]:
    """``_iter_blocks`` with damaged files (truncated or corrupt .gz/.xz, unreadable) turned
    into one ``CorpusError`` naming the file and the last line read: the rest cannot be read,
    so even ``on_error="skip"`` stops here."""
    last_line = 0
    try:
        for block, defect in _iter_blocks(path):
            last_line = block[-1][0]
            yield block, defect
    except _UNREADABLE as error:
        kind = {".gz": "gzip", ".xz": "xz"}.get(path.suffix, "")
        what = f"damaged or not a {kind} file" if kind else "cannot be read"
        detail = getattr(error, "strerror", None) or str(error) or type(error).__name__
        raise CorpusError(
            f"{what} after line {last_line} ({detail})", SourceLocation.of(path, last_line + 1)
        ) from None


def iter_sentences(
    paths: PathLike | Iterable[PathLike],
    *,
    on_error: OnError = "raise",
    errors: list[CorpusError] | None = None,
) -> Iterator[Sentence]:
    """Stream sentences from CoNLL-U files, folders, globs, .gz or .xz; constant memory.

    A malformed sentence raises ``CorpusError`` (file and line); with ``on_error="skip"`` it is
    left out and its error appended to ``errors`` when a list is given.
    """
    if on_error not in ("raise", "skip"):
        raise ValueError(f"on_error must be 'raise' or 'skip', not {on_error!r}")
    for path in resolve_paths(paths):
        stem, source = _stem(path), str(path)
        for number, (block, defect) in enumerate(_read_blocks(path), 1):
            try:
                if defect is not None:
                    raise defect
                sentence = _build(block, stem, number, source)
            except _Bad as bad:
                error = CorpusError(bad.message, SourceLocation.of(path, bad.line, bad.column))
                if on_error == "raise":
                    raise error from None
                if errors is not None:
                    errors.append(error)
                continue
            yield sentence


def read_sentences(
    paths: PathLike | Iterable[PathLike],
    *,
    on_error: OnError = "raise",
    errors: list[CorpusError] | None = None,
) -> list[Sentence]:
    """All sentences of ``iter_sentences`` in a list (for small corpora and tests)."""
    return list(iter_sentences(paths, on_error=on_error, errors=errors))


def _token_line(token: Token) -> str:
    return "\t".join(
        (
            str(token.id),
            token.form,
            token.lemma,
            token.upos,
            token.xpos,
            token.feats,
            str(token.head),
            token.deprel,
            token.deps,
            token.misc,
        )
    )


def format_sentence(sentence: Sentence) -> str:
    """CoNLL-U text of one sentence, ending with its blank line."""
    lines: list[str] = []
    keys = {key for key, _ in sentence.metadata}
    if "sent_id" not in keys:
        lines.append(f"# sent_id = {sentence.id}")
    if "text" not in keys:
        lines.append(f"# text = {sentence.text}")
    for key, value in sentence.metadata:
        lines.append(f"# {key} = {value}" if value else f"# {key}")
    ranges = {first: (first, last, form, misc) for first, last, form, misc in sentence.multiword}
    empties: dict[int, list[str]] = {}
    for raw in sentence.empty_nodes:
        empties.setdefault(int(raw.split(".", 1)[0]), []).append(raw)
    lines.extend(empties.get(0, []))
    for token in sentence.tokens:
        if token.id in ranges:
            first, last, form, misc = ranges[token.id]
            lines.append(f"{first}-{last}\t{form}\t_\t_\t_\t_\t_\t_\t_\t{misc}")
        lines.append(_token_line(token))
        lines.extend(empties.get(token.id, []))
    return "\n".join(lines) + "\n\n"


def write_conllu(sentences: Iterable[Sentence], path: PathLike) -> None:
    """Write sentences to one CoNLL-U file atomically (a reader never sees half a file)."""
    from lexbuild._atomic import atomic_write_text

    atomic_write_text(path, "".join(format_sentence(sentence) for sentence in sentences))

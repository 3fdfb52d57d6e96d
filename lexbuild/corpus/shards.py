"""Shards of a CoNLL-U corpus: byte ranges of its files, cut at sentence boundaries.

A shard is read on its own (on a Dask worker) and yields exactly the sentences a whole-corpus
``iter_sentences`` yields for that range: the same ids (a sentence without ``sent_id`` is
numbered from the blocks before the range), the same line numbers in error messages. Planning
reads each large file once, line by line, without parsing; compressed files are one shard each
(they cannot be entered in the middle).
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO

from lexbuild.corpus.conllu import (
    OnError,
    PathLike,
    Sentence,
    _Bad,
    _build,
    _stem,
    blocks_of_lines,
    iter_sentences,
    resolve_paths,
)
from lexbuild.errors import CorpusError, SourceLocation

__all__ = ["Shard", "iter_shard_sentences", "plan_shards"]

#: Bytes per shard: large enough that a task's start-up is negligible, small enough to spread.
SHARD_BYTES = 16 * 1024 * 1024


@dataclass(frozen=True)
class Shard:
    """Sentences of ``path`` from byte ``start`` to ``end`` (None: the end of the file)."""

    path: str
    start: int = 0
    end: int | None = None
    first_line: int = 1  # line number at ``start``
    blocks_before: int = 0  # sentence blocks before ``start`` (numbers unnamed sentences)

    @property
    def whole(self) -> bool:
        return self.start == 0 and self.end is None


def _blank(raw: bytes, lineno: int) -> bool:
    """The reader's test for a blank line (``str.strip`` after decoding), fast on ASCII."""
    stripped = raw.strip()
    if not stripped:
        return True
    if stripped.isascii():
        return False
    line = raw.decode("utf-8", errors="replace")
    if lineno == 1:
        line = line.removeprefix("\ufeff")
    return not line.strip()


def _cuts(path: Path, size: int) -> list[Shard]:
    shards: list[Shard] = []
    offset, lineno, blocks, in_block = 0, 0, 0, False
    start, first_line, blocks_before = 0, 1, 0
    next_cut = size
    with path.open("rb") as handle:
        for raw in handle:
            lineno += 1
            if _blank(raw, lineno):
                in_block = False
            elif not in_block:
                # A new sentence starts here: a shard boundary when past the target size.
                if offset >= next_cut:
                    shards.append(Shard(str(path), start, offset, first_line, blocks_before))
                    start, first_line, blocks_before = offset, lineno, blocks
                    next_cut = offset + size
                in_block = True
                blocks += 1
            offset += len(raw)
    shards.append(Shard(str(path), start, None, first_line, blocks_before))
    return shards


def plan_shards(
    paths: PathLike | Iterable[PathLike], *, shard_bytes: int = SHARD_BYTES
) -> list[Shard]:
    """The shards of a corpus in reading order (the order of ``iter_sentences``)."""
    shards: list[Shard] = []
    for path in resolve_paths(paths):
        if path.suffix in (".gz", ".xz") or path.stat().st_size <= shard_bytes:
            shards.append(Shard(str(path)))
        else:
            shards.extend(_cuts(path, shard_bytes))
    return shards


def _range_blocks(shard: Shard) -> Iterator[tuple[list[tuple[int, str]], _Bad | None]]:
    """The blocks of a byte range of a plain file, numbered as in the whole file."""
    with open(shard.path, "rb") as handle:
        handle.seek(shard.start)
        yield from blocks_of_lines(_numbered_range(handle, shard))


def _numbered_range(handle: BinaryIO, shard: Shard) -> Iterator[tuple[int, bytes]]:
    offset = shard.start
    for lineno, raw in enumerate(handle, shard.first_line):
        if shard.end is not None and offset >= shard.end:
            return
        offset += len(raw)
        yield lineno, raw


def iter_shard_sentences(
    shard: Shard, *, on_error: OnError = "raise", errors: list[CorpusError] | None = None
) -> Iterator[Sentence]:
    """The sentences of one shard, as ``iter_sentences`` yields them for the whole file."""
    if shard.whole:
        yield from iter_sentences([shard.path], on_error=on_error, errors=errors)
        return
    path = Path(shard.path)
    stem = _stem(path)
    for number, (block, defect) in enumerate(_range_blocks(shard), shard.blocks_before + 1):
        try:
            if defect is not None:
                raise defect
            sentence = _build(block, stem, number, shard.path)
        except _Bad as bad:
            error = CorpusError(bad.message, SourceLocation.of(path, bad.line))
            if on_error == "raise":
                raise error from None
            if errors is not None:
                errors.append(error)
            continue
        yield sentence

"""Guards shared by the small readers (JSON settings, TSV tables, gold files): whatever is wrong
with a file ends in one coded error naming file, line and column, never a traceback.

Limits (stated in the README, "Limits on input"): a JSON file is read whole, up to
``MAX_JSON_BYTES``, and nested at most as deep as Python's recursion limit allows (deeper is an
error, not a crash); tables are streamed line by line.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from lexbuild.errors import LexbuildError, SourceLocation

__all__ = ["MAX_JSON_BYTES", "load_json", "text_lines"]

#: Largest JSON settings file read (bytes); ours are a few kilobytes.
MAX_JSON_BYTES = 64 * 1024 * 1024


def load_json(path: str | Path, error: type[LexbuildError]) -> Any:
    """The JSON value in ``path``; ``error`` (file, line, column) when it cannot be read."""
    where = Path(path)
    try:
        if where.stat().st_size > MAX_JSON_BYTES:
            raise error(
                f"file larger than {MAX_JSON_BYTES} bytes: not a lexbuild settings file",
                SourceLocation(str(where)),
            )
        data = where.read_bytes()
    except OSError as problem:
        raise error(
            f"cannot read: {problem.strerror or problem}", SourceLocation(str(where))
        ) from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as problem:
        line = data[: problem.start].count(b"\n") + 1
        column = problem.start - (data.rfind(b"\n", 0, problem.start) + 1) + 1
        raise error(
            f"not UTF-8 (byte {data[problem.start]:#04x})", SourceLocation(str(where), line, column)
        ) from None
    try:
        return json.loads(text)
    except json.JSONDecodeError as problem:
        raise error(
            f"not valid JSON: {problem.msg}",
            SourceLocation(str(where), problem.lineno, problem.colno),
        ) from None
    except RecursionError:
        raise error("JSON nested too deeply", SourceLocation(str(where))) from None
    except ValueError as problem:  # an integer over Python's 4300-digit conversion limit
        raise error(f"not valid JSON: {problem}", SourceLocation(str(where))) from None


def text_lines(path: str | Path, error: type[LexbuildError]) -> Iterator[str]:
    """The lines of a UTF-8 text file (with their endings, as ``csv`` wants them), streamed;
    a byte that is not UTF-8 raises ``error`` at its line and column."""
    where = Path(path)
    try:
        handle = where.open("rb")
    except OSError as problem:
        raise error(
            f"cannot read: {problem.strerror or problem}", SourceLocation(str(where))
        ) from None
    with handle:
        for number, raw in enumerate(handle, 1):
            try:
                yield raw.decode("utf-8")
            except UnicodeDecodeError as problem:
                raise error(
                    f"not UTF-8 (byte {raw[problem.start]:#04x})",
                    SourceLocation(str(where), number, problem.start + 1),
                ) from None

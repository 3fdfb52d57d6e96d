"""What every command shares: exit codes and common options (no command table import)."""

from __future__ import annotations

import argparse
import contextlib
import gc
from collections.abc import Iterator
from pathlib import Path
from typing import Any

__all__ = [
    "EXIT_FINDINGS",
    "EXIT_OK",
    "EXIT_USAGE",
    "add_no_cache_option",
    "add_schemas_option",
    "build_cache",
]

EXIT_OK = 0  # clean
EXIT_FINDINGS = 1  # check or validation findings
EXIT_USAGE = 2  # usage, input or I/O error


def add_schemas_option(parser: argparse.ArgumentParser) -> None:
    """``--schemas DIR``, with the documented search order when it is not given."""
    parser.add_argument(
        "--schemas",
        type=Path,
        default=None,
        metavar="DIR",
        help="folder with the published schema files (default: $LEXBUILD_SCHEMAS, else the "
        "per-user cache filled by `lexbuild schemas fetch`)",
    )


def add_no_cache_option(parser: argparse.ArgumentParser) -> None:
    """``--no-cache``: neither read nor write the per-user cache of build results."""
    parser.add_argument(
        "--no-cache",
        action="store_true",
        help="build everything afresh, neither reading nor writing the cache of build results "
        "($LEXBUILD_CACHE/build, else $XDG_CACHE_HOME/lexbuild/build, else "
        "~/.cache/lexbuild/build)",
    )


@contextlib.contextmanager
def build_cache(args: argparse.Namespace) -> Iterator[Any]:
    """The per-user cache of build results, or None with ``--no-cache``; closed at the end."""
    if getattr(args, "no_cache", False):
        yield None
        return
    from lexbuild.lexicon.build_cache import BuildCache

    with BuildCache() as cache:
        yield cache


#: Garbage-collector thresholds while a command runs (CPython's defaults: 700, 10, 10). A
#: command builds its data once and keeps it to the end: 10,000 entries make millions of
#: long-lived objects, and every collection that reaches the older generations walks them
#: all. Older generations are still collected, less often, so cyclic garbage stays bounded in
#: long runs. Measured on the 10,000-entry rebuild of an unchanged document (bench_lexicon.py
#: chains, three alternated fresh processes each): 1.68-1.71 s with the defaults, 1.50-1.70 s
#: with these, 1.43-1.52 s with the collector off; whole benchmark runs vary more than that.
COMMAND_GC_THRESHOLDS = (50_000, 20, 100)


@contextlib.contextmanager
def command_gc() -> Iterator[None]:
    """Run a command with fewer collections; the previous thresholds come back after."""
    before = gc.get_threshold()
    # zip stops at the shorter: a CPython with other generations keeps the rest as they are.
    raised = (max(old, new) for old, new in zip(before, COMMAND_GC_THRESHOLDS, strict=False))
    gc.set_threshold(*raised)
    try:
        yield
    finally:
        gc.set_threshold(*before)

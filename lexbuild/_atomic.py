"""Atomic file and folder writes: a reader sees the old content or the new, never half of it."""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path

__all__ = ["atomic_write_bytes", "atomic_write_text", "replace_dir_atomically", "staging_dir"]


def atomic_write_bytes(path: str | Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file in the same folder + ``os.replace``."""
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp_name, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp_name)
        raise


def atomic_write_text(path: str | Path, text: str) -> None:
    atomic_write_bytes(path, text.encode("utf-8"))


@contextlib.contextmanager
def staging_dir(final: str | Path) -> Iterator[Path]:
    """A temporary sibling folder of ``final``; removed if the block raises."""
    target = Path(final)
    target.parent.mkdir(parents=True, exist_ok=True)
    stage = Path(tempfile.mkdtemp(prefix=f".{target.name}.", suffix=".partial", dir=target.parent))
    try:
        yield stage
    except BaseException:
        shutil.rmtree(stage, ignore_errors=True)
        raise


def replace_dir_atomically(stage: Path, final: str | Path) -> None:
    """Move a fully written ``stage`` folder to ``final`` (which must not exist yet)."""
    target = Path(final)
    if target.exists():
        raise FileExistsError(f"{target} already exists")
    os.rename(stage, target)

"""Atomic file and folder writes: a reader sees the old content or the new, never half of it."""

from __future__ import annotations

import contextlib
import ctypes
import errno
import os
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path

__all__ = [
    "atomic_write_bytes",
    "atomic_write_text",
    "exchange_dirs",
    "recover_swap",
    "staging_dir",
    "swap_dir",
]


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


def _backup_name(target: Path) -> Path:
    return target.with_name(f".{target.name}.swap-backup")


def exchange_dirs(a: Path, b: Path) -> bool:
    """Atomically swap two folders (Linux renameat2 RENAME_EXCHANGE); False if unsupported."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    at_fdcwd, rename_exchange = -100, 2
    if renameat2(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), rename_exchange) == 0:
        return True
    code = ctypes.get_errno()
    if code in (errno.ENOSYS, errno.EINVAL, errno.EOPNOTSUPP):
        return False
    raise OSError(code, f"cannot swap {a} and {b}: {os.strerror(code)}")


def swap_dir(stage: Path, final: str | Path, *, replace: bool = True) -> None:
    """Put the fully written ``stage`` folder at ``final``, atomically: a reader sees the old
    folder or the new one. The one folder swap of lexbuild (induction folders, merged sources,
    editions).

    ``final`` absent: one rename. Present (and ``replace``): an atomic exchange where the system
    has one, else two renames through a backup name that ``recover_swap`` undoes after a crash
    between them. ``replace=False`` refuses an existing ``final`` (FileExistsError).
    """
    target = Path(final)
    if not target.exists():
        os.rename(stage, target)
        return
    if not replace:
        raise FileExistsError(f"{target} already exists")
    if exchange_dirs(stage, target):
        shutil.rmtree(stage, ignore_errors=True)  # now holds the old folder
        return
    backup = _backup_name(target)
    os.rename(target, backup)
    os.rename(stage, target)
    shutil.rmtree(backup, ignore_errors=True)


def recover_swap(final: str | Path) -> bool:
    """Put a folder back after a crash inside the two-rename fallback of ``swap_dir``."""
    target = Path(final)
    backup = _backup_name(target)
    if backup.is_dir() and not target.exists():
        os.rename(backup, target)
        return True
    if backup.is_dir() and target.is_dir():  # the swap completed; only the cleanup was lost
        shutil.rmtree(backup)
    return False

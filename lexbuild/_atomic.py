"""Atomic file and folder writes: a reader sees the old content or the new, never half of it."""

from __future__ import annotations

import contextlib
import ctypes
import errno
import logging
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
    "remove_stale_staging",
    "staging_dir",
    "swap_dir",
    "symlinks_inside",
]

_LOG = logging.getLogger("lexbuild")


def _umask() -> int:
    # Read without changing it where the system says it (Linux); else the set-and-restore idiom.
    with contextlib.suppress(OSError, ValueError):
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("Umask:"):
                return int(line.split()[1], 8)
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _published_mode(directory: bool = False) -> int:
    """The mode a plain ``open``/``mkdir`` would give: mkstemp and mkdtemp make files private."""
    return (0o777 if directory else 0o666) & ~_umask()


def atomic_write_bytes(path: str | Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file in the same folder + ``os.replace``."""
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    try:
        os.fchmod(fd, _published_mode())  # readable by others as the umask allows, like open()
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
    """A temporary sibling folder of ``final``; removed if the block raises.

    Its name holds the process id (``.NAME.PID-XXXX.partial``), so that the next run can tell
    the leftovers of a killed run from a live one; they are removed first, with a message.
    """
    target = Path(final)
    target.parent.mkdir(parents=True, exist_ok=True)
    remove_stale_staging(target)
    stage = Path(
        tempfile.mkdtemp(
            prefix=f".{target.name}.{os.getpid()}-", suffix=".partial", dir=target.parent
        )
    )
    stage.chmod(_published_mode(directory=True))
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


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True  # someone else's live process
    return True


def remove_stale_staging(final: str | Path) -> list[Path]:
    """Remove the ``.NAME.*.partial`` staging folders that killed runs left beside ``final``.

    A folder whose process is still alive is kept (a concurrent run); one without a process id
    in its name (older versions) is removed. Each removal is logged (``lexbuild`` logger, shown on
    stderr by default); returns the folders removed.
    """
    target = Path(final)
    removed: list[Path] = []
    if not target.parent.is_dir():
        return removed
    prefix = f".{target.name}."
    for leftover in sorted(target.parent.glob(f"{glob_escape(prefix)}*.partial")):
        if leftover.is_symlink() or not leftover.is_dir():
            continue
        middle = leftover.name[len(prefix) : -len(".partial")]
        pid_text = middle.split("-", 1)[0]
        if pid_text.isdigit() and "-" in middle and _alive(int(pid_text)):
            continue
        shutil.rmtree(leftover, ignore_errors=True)
        if not leftover.exists():
            removed.append(leftover)
            _LOG.warning("removed %s, left by an interrupted run", leftover)
    return removed


def glob_escape(text: str) -> str:
    """``text`` with glob's special characters taken literally."""
    import glob

    return glob.escape(text)


def symlinks_inside(folder: str | Path) -> list[Path]:
    """Symbolic links at or under ``folder`` (not followed): writing through one would change
    files outside the folder before an atomic swap could protect them."""
    root = Path(folder)
    found = [root] if root.is_symlink() else []
    for directory, dirnames, filenames in os.walk(root):
        for name in [*dirnames, *filenames]:
            path = Path(directory) / name
            if path.is_symlink():
                found.append(path)
    return sorted(found)

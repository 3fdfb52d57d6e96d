"""The per-user cache of build results: what an incremental build reuses between runs.

Records are bytes under (kind, key): the key is a content hash of everything the result depends
on (see ``content_key``), so a record is never stale, only unused. They live in one SQLite file,
``<cache>/build/results.sqlite``, where ``<cache>`` follows the vector cache's rule:
``$LEXBUILD_CACHE``, else ``$XDG_CACHE_HOME/lexbuild``, else ``~/.cache/lexbuild``.

* Concurrent runs: SQLite's locks serialise writers; a run that waits longer than
  ``BUSY_SECONDS`` for a lock reads nothing or stores nothing (a cache is never worth failing
  a build for), and leaves the file alone.
* Damage: each record carries a CRC-32 of its bytes, checked on every read; a record that does
  not match, or a file SQLite cannot read (truncated, overwritten), is a miss. A damaged file is
  replaced by an empty one. Nothing read from the cache is trusted beyond its checksum: callers
  turn a record they cannot decode into a miss too.
* Size: records are only added. Delete the ``build`` folder to reclaim the space.
"""

from __future__ import annotations

import contextlib
import hashlib
import logging
import os
import sqlite3
import zlib
from collections.abc import Iterable, Sequence
from pathlib import Path

__all__ = [
    "BUILD_DIR",
    "BuildCache",
    "cache_folder",
    "code_fingerprint",
    "content_key",
]

BUILD_DIR = "build"
DB_FILE = "results.sqlite"
#: How long a writer waits for another process's write to finish before giving up storing.
BUSY_SECONDS = 30.0
_BATCH = 500  # keys per SELECT (SQLite allows at most 32,766 variables)
_LOG = logging.getLogger("lexbuild")
#: The layout of the records, part of every key (with the modules' text below): 2 since
#: entry records and fragments are binary (fixed heads, fragments kept as UTF-8 bytes).
RECORD_LAYOUT = 2

#: Modules whose code shapes a cached result: their text is part of every key, so that a new
#: version of any of them (released or not) never reuses a result of the old one.
_CODE_MODULES = (
    "lexicon/model.py",
    "lexicon/ids.py",
    "lexicon/sources.py",
    "lexicon/checks.py",
    "lexicon/build.py",
    "lexicon/build_cache.py",
    "formats/fragments.py",
    "formats/tei.py",
    "formats/lmf.py",
    "formats/validate.py",
    "formats/xmlsafe.py",
    "formats/schemastore.py",
)


def cache_folder(folder: str | Path | None = None) -> Path:
    """The build-results folder: ``folder`` if given, else ``$LEXBUILD_CACHE/build``, else
    ``$XDG_CACHE_HOME/lexbuild/build``, else ``~/.cache/lexbuild/build``."""
    if folder is not None:
        return Path(folder)
    base = os.environ.get("LEXBUILD_CACHE")
    if not base:
        xdg = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
        base = str(Path(xdg) / "lexbuild")
    return Path(base) / BUILD_DIR


def code_fingerprint() -> str:
    """sha256 of the tool version and the text of the modules that shape cached results."""
    from lexbuild import __version__

    digest = hashlib.sha256(f"lexbuild {__version__} records {RECORD_LAYOUT}\n".encode())
    package = Path(__file__).resolve().parent.parent
    for name in _CODE_MODULES:
        digest.update(name.encode() + b"\0")
        with contextlib.suppress(OSError):
            digest.update((package / name).read_bytes())
    return digest.hexdigest()


def content_key(*parts: bytes | str) -> str:
    """sha256 over length-prefixed parts: ('ab', 'c') and ('a', 'bc') give different keys."""
    pieces = []
    for part in parts:
        data = part.encode("utf-8") if isinstance(part, str) else part
        pieces.append(len(data).to_bytes(8, "big"))
        pieces.append(data)
    return hashlib.sha256(b"".join(pieces)).hexdigest()


class BuildCache:
    """Records of bytes under (kind, key) in ``folder/results.sqlite`` (see the module doc)."""

    def __init__(self, folder: str | Path | None = None) -> None:
        self.folder = cache_folder(folder)
        self.path = self.folder / DB_FILE
        self._connection: sqlite3.Connection | None = None
        self._broken = False
        self.hits = 0
        self.misses = 0

    # ---------------------------------------------------------------- connection

    def _connect(self) -> sqlite3.Connection | None:
        if self._connection is not None or self._broken:
            return self._connection
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
            self._connection = self._open()
        except sqlite3.OperationalError as error:  # locked past the timeout, read-only, ...
            _LOG.warning("build cache %s not used (%s)", self.path, error)
            self._broken = True
        except sqlite3.DatabaseError as error:
            _LOG.warning("build cache %s unreadable (%s): starting an empty one", self.path, error)
            self._discard()
            try:
                self._connection = self._open()
            except (sqlite3.Error, OSError):
                self._broken = True
        except OSError as error:
            _LOG.warning("build cache %s cannot be opened (%s): not used", self.path, error)
            self._broken = True
        return self._connection

    def _open(self) -> sqlite3.Connection:
        connection = sqlite3.connect(self.path, timeout=BUSY_SECONDS, isolation_level=None)
        try:
            connection.execute(
                "CREATE TABLE IF NOT EXISTS results (kind TEXT NOT NULL, key TEXT NOT NULL, "
                "crc INTEGER NOT NULL, value BLOB NOT NULL, PRIMARY KEY (kind, key))"
            )
            connection.execute("SELECT count(*) FROM results WHERE kind = ''").fetchone()
        except BaseException:
            connection.close()
            raise
        return connection

    def _discard(self) -> None:
        """Remove a damaged file (and its journal): it is a cache, the next run refills it."""
        if self._connection is not None:
            with contextlib.suppress(sqlite3.Error):
                self._connection.close()
            self._connection = None
        for suffix in ("", "-journal", "-wal", "-shm"):
            with contextlib.suppress(OSError):
                Path(f"{self.path}{suffix}").unlink()

    def close(self) -> None:
        if self._connection is not None:
            with contextlib.suppress(sqlite3.Error):
                self._connection.close()
            self._connection = None

    def __enter__(self) -> BuildCache:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # ---------------------------------------------------------------- records

    def get_many(self, kind: str, keys: Sequence[str]) -> dict[str, bytes]:
        """The records found for ``keys``; a missing, damaged or unreadable one is left out."""
        connection = self._connect()
        wanted = list(dict.fromkeys(keys))
        found: dict[str, bytes] = {}
        if connection is not None:
            try:
                for start in range(0, len(wanted), _BATCH):
                    batch = wanted[start : start + _BATCH]
                    marks = ",".join("?" * len(batch))
                    rows = connection.execute(
                        f"SELECT key, crc, value FROM results WHERE kind = ? AND key IN ({marks})",
                        [kind, *batch],
                    )
                    for key, crc, value in rows:
                        data = bytes(value)
                        if zlib.crc32(data) == crc:
                            found[key] = data
            except sqlite3.OperationalError as error:  # busy past the timeout: all misses
                _LOG.warning("build cache %s not read (%s)", self.path, error)
                found = {}
            except sqlite3.DatabaseError as error:
                _LOG.warning("build cache %s unreadable (%s): starting an empty one", self.path,
                             error)
                self._discard()
                found = {}
        self.hits += len(found)
        self.misses += len(wanted) - len(found)
        return found

    def get(self, kind: str, key: str) -> bytes | None:
        return self.get_many(kind, [key]).get(key)

    def put_many(self, kind: str, items: dict[str, bytes]) -> None:
        """Store records in one transaction; on any database trouble, store nothing."""
        if not items:
            return
        connection = self._connect()
        if connection is None:
            return
        rows: Iterable[tuple[str, str, int, bytes]] = (
            (kind, key, zlib.crc32(value), value) for key, value in items.items()
        )
        try:
            connection.execute("BEGIN IMMEDIATE")
            try:
                connection.executemany(
                    "INSERT OR REPLACE INTO results (kind, key, crc, value) VALUES (?, ?, ?, ?)",
                    rows,
                )
                connection.execute("COMMIT")
            except BaseException:
                with contextlib.suppress(sqlite3.Error):
                    connection.execute("ROLLBACK")
                raise
        except sqlite3.OperationalError as error:  # busy past the timeout, disk full, read-only
            _LOG.warning("build cache %s: results not stored (%s)", self.path, error)
        except sqlite3.DatabaseError as error:
            _LOG.warning("build cache %s damaged (%s): starting an empty one", self.path, error)
            self._discard()

    def put(self, kind: str, key: str, value: bytes) -> None:
        self.put_many(kind, {key: value})

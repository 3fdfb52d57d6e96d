"""Files taken from outside the project, pinned by URL and sha256, fetched into a per-user cache.

``PINNED_FILES`` is the one manifest of every external file lexbuild or its tests read: the
published schemas (needed by ``export``, ``validate``, ``release`` and ``demo``) and the UD
treebanks the tests check the tool against. Each entry has a URL at a fixed commit (never a
branch) and the sha256 of the file published there.

A fetch downloads each file into a temporary file beside its target, checks the sha256 before
anything lands, and renames it into place only when every file of the request passed: a bad or
incomplete download leaves the cache as it was, and a fetch killed mid-download leaves at most a
hidden ``.part`` file that no lookup takes for the real one. ``mirror`` replaces the pinned URLs
with ``BASE/<file name>``, BASE being an http(s) URL or a local folder (how CI and offline sites
use the reference copies in ``../shared``). Downloads go through urllib, so the usual proxy
variables (``https_proxy``, ``http_proxy``, ``no_proxy``) apply.
"""

from __future__ import annotations

import hashlib
import http.client
import os
import tempfile
import time
import urllib.error
import urllib.request
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO, Literal

from lexbuild.errors import FetchError

__all__ = [
    "GROUPS",
    "PINNED_FILES",
    "FileState",
    "PinnedFile",
    "fetch_files",
    "file_state",
    "pinned",
    "sha256_of",
    "user_cache",
]

Group = Literal["schemas", "ud"]

#: Folder of each group inside a mirror laid out like ``../shared``.
GROUPS: dict[str, str] = {"schemas": "schemas", "ud": "corpora/ud"}

_DARIAH = (
    "https://raw.githubusercontent.com/DARIAH-ERIC/lexicalresources/"
    "d2f3ce22adb2878e451ec7ca27a0793694a47a79/Schemas/TEILex0/"
)
_SEQUOIA = (
    "https://raw.githubusercontent.com/UniversalDependencies/UD_French-Sequoia/"
    "f5b049600c89d2cf15ebbec860f75d703884d32b/"
)
_GSD = (
    "https://raw.githubusercontent.com/UniversalDependencies/UD_French-GSD/"
    "830e2782304af08b3cc1c9250475343e04274d81/"
)
_EWT = (
    "https://raw.githubusercontent.com/UniversalDependencies/UD_English-EWT/"
    "15d613d8447b3478787d4c278730a1e48a945efb/"
)


@dataclass(frozen=True, slots=True)
class PinnedFile:
    """One external file: where it is published and the sha256 of the published bytes."""

    name: str
    group: Group
    url: str
    sha256: str
    source: str  # quoted in messages: repository, path, commit, licence


#: Every external file, with the URL at a fixed commit and its sha256 (the same table is in
#: ``../shared/schemas/README.md`` and ``../shared/corpora/README.md``; a test compares them).
PINNED_FILES: tuple[PinnedFile, ...] = (
    PinnedFile(
        "TEILex0.rng",
        "schemas",
        _DARIAH + "out/TEILex0.rng",
        "f5270a718c377d18d3137d4fbbd883e3d39a01dca890fa62f5f580d43d1aa30a",
        "DARIAH-ERIC/lexicalresources on GitHub, Schemas/TEILex0/out/TEILex0.rng "
        "(commit d2f3ce22, 2025-05-14; BSD-2-Clause)",
    ),
    PinnedFile(
        "TEILex0.sch",
        "schemas",
        _DARIAH + "TEILex0.sch",
        "8d3c7d06c141a2e023273ea4772fbb19374e1e91ad1c29f5d9dcbfffbce943fd",
        "DARIAH-ERIC/lexicalresources on GitHub, Schemas/TEILex0/TEILex0.sch (same commit)",
    ),
    PinnedFile(
        "DTD_LMF_REV_16.dtd",
        "schemas",
        "https://raw.githubusercontent.com/stardust85/lmf-merger/"
        "38890b40ec3db2b27d86b91433b66004464876e6/DTD_LMF_REV_16.dtd",
        "160db6625789c57eb75a16456232792f0931c99efd147bc3ac0a19cbfd66a482",
        "the public copy in stardust85/lmf-merger on GitHub, DTD_LMF_REV_16.dtd "
        "(ISO 24613:2008 informative annex)",
    ),
    PinnedFile(
        "fr_sequoia-ud-train.conllu",
        "ud",
        _SEQUOIA + "fr_sequoia-ud-train.conllu",
        "56424954edf9d20a4d1184e37bfe931fb7c64da82bf2a587b4f35b828d79d767",
        "UD French-Sequoia at commit f5b04960 (LGPL-LR)",
    ),
    PinnedFile(
        "fr_sequoia-ud-dev.conllu",
        "ud",
        _SEQUOIA + "fr_sequoia-ud-dev.conllu",
        "a5138dc5e8886484c2f8919e97113f56b9e4329e5cf2a999c021d6ee45e8b45d",
        "UD French-Sequoia at commit f5b04960 (LGPL-LR)",
    ),
    PinnedFile(
        "fr_sequoia-ud-test.conllu",
        "ud",
        _SEQUOIA + "fr_sequoia-ud-test.conllu",
        "a650e7a223fe191009ded17cedae740659449be20354bd68205c376de4ddef2d",
        "UD French-Sequoia at commit f5b04960 (LGPL-LR)",
    ),
    PinnedFile(
        "fr_gsd-ud-dev.conllu",
        "ud",
        _GSD + "fr_gsd-ud-dev.conllu",
        "3e7531b645e5bd6fe37bb619cdd8292e87f5937e64cd8627b4094324eb830e6b",
        "UD French-GSD at commit 830e2782 (CC BY-SA 4.0)",
    ),
    PinnedFile(
        "fr_gsd-ud-test.conllu",
        "ud",
        _GSD + "fr_gsd-ud-test.conllu",
        "5d1743c7a9ce2908943d4a430ed9a77755e2a8d7e32d42ee0f1d6a0b528f0be8",
        "UD French-GSD at commit 830e2782 (CC BY-SA 4.0)",
    ),
    PinnedFile(
        "en_ewt-ud-dev.conllu",
        "ud",
        _EWT + "en_ewt-ud-dev.conllu",
        "531a54ff90d6ab12201c5a50c3e78e6ddac4de69abc4bce5d275d3cd29efe2b6",
        "UD English-EWT at commit 15d613d8 (CC BY-SA 4.0)",
    ),
)

_CHUNK = 1 << 16
#: A leftover ``.part`` file older than this belongs to a fetch that died; it is removed.
_STALE_PART_SECONDS = 3600.0


def pinned(group: str) -> list[PinnedFile]:
    """The pinned files of one group, in table order."""
    if group not in GROUPS:
        raise FetchError(f"unknown group of external files {group!r}; known: {sorted(GROUPS)}")
    return [file for file in PINNED_FILES if file.group == group]


def user_cache(group: str) -> Path:
    """``$XDG_CACHE_HOME/lexbuild/<group>`` (``~/.cache`` when the variable is unset)."""
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "lexbuild" / group


def sha256_of(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as stream:
        for block in iter(lambda: stream.read(_CHUNK), b""):
            digest.update(block)
    return digest.hexdigest()


StateName = Literal["ok", "altered", "missing"]


@dataclass(frozen=True, slots=True)
class FileState:
    """What a folder holds under a pinned file's name."""

    file: PinnedFile
    path: Path
    state: StateName
    sha256: str | None = None


def file_state(file: PinnedFile, folder: Path) -> FileState:
    path = folder / file.name
    if not path.is_file():
        return FileState(file, path, "missing")
    digest = sha256_of(path)
    return FileState(file, path, "ok" if digest == file.sha256 else "altered", digest)


def is_url(location: str | Path) -> bool:
    return isinstance(location, str) and location.split("://", 1)[0] in {"http", "https", "file"}


def source_of(file: PinnedFile, mirror: str | Path | None) -> str | Path:
    """Where to read ``file`` from: the pinned URL, or ``BASE/<file name>`` of a mirror."""
    if mirror is None or mirror == "":
        return file.url
    if is_url(mirror):
        return str(mirror).rstrip("/") + "/" + file.name
    return Path(mirror) / file.name


class _Retryable(Exception):
    """A failure worth another try (timeout, reset, truncated body, server error)."""


def _copy_stream(stream: BinaryIO, out: BinaryIO, expected_length: int | None) -> str:
    digest = hashlib.sha256()
    received = 0
    for block in iter(lambda: stream.read(_CHUNK), b""):
        digest.update(block)
        out.write(block)
        received += len(block)
    if expected_length is not None and received != expected_length:
        raise _Retryable(f"received {received} of {expected_length} bytes")
    return digest.hexdigest()


def _download(source: str | Path, out: BinaryIO, timeout: float) -> str:
    """Write the bytes of ``source`` to ``out``; returns their sha256."""
    if isinstance(source, Path):
        try:
            with source.open("rb") as stream:
                return _copy_stream(stream, out, None)
        except FileNotFoundError as error:
            raise FetchError(f"{source} does not exist in the mirror folder") from error
    request = urllib.request.Request(source, headers={"User-Agent": "lexbuild"})
    try:
        # A new opener per download reads https_proxy / http_proxy / no_proxy as they are now
        # (urlopen's shared opener keeps the variables of its first use).
        opener = urllib.request.build_opener()
        with opener.open(request, timeout=timeout) as response:
            length = response.headers.get("Content-Length")
            return _copy_stream(response, out, int(length) if length else None)
    except urllib.error.HTTPError as error:
        if error.code >= 500:
            raise _Retryable(f"HTTP {error.code} {error.reason}") from error
        raise FetchError(f"{source}: HTTP {error.code} {error.reason}") from error
    except urllib.error.URLError as error:
        if isinstance(error.reason, OSError) and not isinstance(
            error.reason, FileNotFoundError
        ):
            raise _Retryable(f"{error.reason}") from error
        raise FetchError(f"{source}: {error.reason}") from error
    except (TimeoutError, ConnectionError, http.client.HTTPException) as error:
        raise _Retryable(f"{type(error).__name__}: {error}") from error


def _remove_stale_parts(folder: Path) -> None:
    now = time.time()
    for part in folder.glob(".*.part"):
        try:
            if now - part.stat().st_mtime > _STALE_PART_SECONDS:
                part.unlink()
        except OSError:  # another process removed or renamed it
            pass


def _fetch_to_temp(
    file: PinnedFile, folder: Path, source: str | Path, timeout: float, attempts: int
) -> Path:
    """Download ``file`` into a hidden temporary file of ``folder``, sha256 checked."""
    last = ""
    for attempt in range(1, attempts + 1):
        handle, name = tempfile.mkstemp(dir=folder, prefix=f".{file.name}.", suffix=".part")
        temp = Path(name)
        try:
            with os.fdopen(handle, "wb") as out:
                digest = _download(source, out, timeout)
                out.flush()
                os.fsync(out.fileno())
        except _Retryable as error:
            temp.unlink(missing_ok=True)
            last = str(error)
            if attempt < attempts:
                time.sleep(min(0.2 * 2**attempt, 5.0))
            continue
        except BaseException:  # FetchError, KeyboardInterrupt: nothing is left behind
            temp.unlink(missing_ok=True)
            raise
        if digest != file.sha256:
            temp.unlink(missing_ok=True)
            raise FetchError(
                f"{source}: sha256 {digest} received, {file.sha256} expected: not the "
                f"published {file.name} ({file.source}); nothing was changed in {folder}"
            )
        return temp
    raise FetchError(
        f"{source}: gave up after {attempts} attempts ({last}); nothing was changed in {folder}"
    )


@dataclass(frozen=True, slots=True)
class FetchOutcome:
    file: PinnedFile
    path: Path
    fetched: bool  # False: a verified copy was already there
    source: str


def fetch_files(
    files: Sequence[PinnedFile] | Iterable[PinnedFile],
    folder: str | Path,
    *,
    mirror: str | Path | None = None,
    force: bool = False,
    timeout: float = 30.0,
    attempts: int = 3,
) -> list[FetchOutcome]:
    """Bring ``files`` into ``folder``, each checked against its sha256.

    A file already there with the right checksum is kept (unless ``force``). All downloads are
    verified before the first one is moved into place, so a failure changes nothing.
    """
    target = Path(folder)
    target.mkdir(parents=True, exist_ok=True)
    _remove_stale_parts(target)
    todo: list[tuple[PinnedFile, str | Path]] = []
    outcomes: list[FetchOutcome] = []
    for file in files:
        state = file_state(file, target)
        if state.state == "ok" and not force:
            outcomes.append(FetchOutcome(file, state.path, False, str(state.path)))
        else:
            todo.append((file, source_of(file, mirror)))
    ready: list[tuple[PinnedFile, Path, str | Path]] = []
    try:
        for file, source in todo:
            ready.append((file, _fetch_to_temp(file, target, source, timeout, attempts), source))
    except BaseException:
        for _, temp, _ in ready:
            temp.unlink(missing_ok=True)
        raise
    for file, temp, source in ready:
        os.chmod(temp, 0o644)  # mkstemp makes it private; the cache holds public files
        os.replace(temp, target / file.name)
        outcomes.append(FetchOutcome(file, target / file.name, True, str(source)))
    _fsync_folder(target)
    order = {file.name: index for index, file in enumerate(PINNED_FILES)}
    return sorted(outcomes, key=lambda outcome: order.get(outcome.file.name, len(order)))


def _fsync_folder(folder: Path) -> None:
    try:
        descriptor = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(descriptor)
    except OSError:
        pass
    finally:
        os.close(descriptor)


def local_copy(group: str, shared: str | Path | None) -> Path | None:
    """The folder of ``group`` in a local reference tree (``../shared``) when it holds every
    file of the group, else None. A copy there with another checksum is an error, not a miss."""
    if shared is None or is_url(shared):
        return None
    folder = Path(shared) / GROUPS[group]
    states = [file_state(file, folder) for file in pinned(group)]
    if any(state.state == "missing" for state in states):
        return None
    altered = [state for state in states if state.state == "altered"]
    if altered:
        bad = altered[0]
        raise FetchError(
            f"{bad.path} has sha256 {bad.sha256}, not the published {bad.file.sha256}: the "
            f"reference copy was altered; replace it with {bad.file.url}"
        )
    return folder


def ensure_group(group: str, shared: str | Path | None = None) -> Path:
    """A folder holding every verified file of ``group``.

    ``shared`` is a reference tree laid out like ``../shared`` (a folder or an http(s) URL):
    a folder that holds the whole group is used in place; otherwise the files are fetched into
    the per-user cache from ``shared`` (as a mirror) or, when it is None, from the pinned URLs.
    """
    found = local_copy(group, shared)
    if found is not None:
        return found
    mirror: str | Path | None = None
    if shared is not None:
        mirror = (
            str(shared).rstrip("/") + "/" + GROUPS[group]
            if is_url(shared)
            else Path(shared) / GROUPS[group]
        )
    cache = user_cache(group)
    fetch_files(pinned(group), cache, mirror=mirror)
    return cache

"""Occurrence vectors: one small interface, occurrences in, a float32 matrix out.

Three representations ship:

* ``StaticSyntacticVectors`` (the embedded default, offline), in ``lexbuild.senses.static``.
* ``TransformerEncoder`` (in ``lexbuild.senses.transformer``, imported lazily): a transformers
  encoder loaded from a local directory or the local Hugging Face cache (never downloaded).
* ``SubstituteVectors`` (in ``lexbuild.senses.substitutes``, imported lazily): a masked
  language model's substitutes at the verb, TF-IDF weighted per verb (``reweight``).

``encode_cached`` puts a ``VectorCache`` (SQLite, one file) in front of any representation: a
vector is keyed by the representation's fingerprint (id, model, settings), a hash of what the
vector depends on in the sentence, and the verb's token span; re-running on the same corpus
recomputes nothing.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import socket
import sqlite3
import threading
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Protocol, runtime_checkable

import numpy as np
import numpy.typing as npt

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.errors import InductionError

__all__ = [
    "REPRESENTATIONS",
    "SHARDS_DIR",
    "CacheStats",
    "Representation",
    "VectorCache",
    "WorkerVectorCache",
    "cache_file",
    "canonical_representation_name",
    "encode_cached",
    "load_representation",
    "merge_vector_shards",
]

Matrix = npt.NDArray[np.float32]
Progress = Callable[[int], None]


@runtime_checkable
class Representation(Protocol):
    """What induction needs from a representation of verb occurrences."""

    @property
    def id(self) -> str:
        """Short name of the method ("static-syntactic", "transformer")."""
        ...

    @property
    def model(self) -> str | None:
        """Identifier of the model behind it (package and version, or folder and hash)."""
        ...

    @property
    def settings(self) -> dict[str, Any]:
        """Every setting that changes the vectors (JSON-serialisable)."""
        ...

    @property
    def placeholder(self) -> str:
        """A word that hides a verb's identity (pseudo-verb calibration)."""
        ...

    def input_key(self, occurrence: Occurrence) -> str:
        """A hash of what this occurrence's vector depends on (sentence and verb span)."""
        ...

    def encode(self, occurrences: Sequence[Occurrence]) -> Matrix:
        """One float32 row per occurrence, in order."""
        ...


def fingerprint(representation: Representation) -> str:
    """Hash of a representation's id, model and settings: the cache's namespace."""
    blob = json.dumps(
        {
            "id": representation.id,
            "model": representation.model,
            "settings": representation.settings,
        },
        sort_keys=True,
        ensure_ascii=False,
    )
    return hashlib.sha256(blob.encode("utf-8")).hexdigest()[:32]


def _digest(*parts: str) -> str:
    h = hashlib.sha256()
    for part in parts:
        h.update(part.encode("utf-8"))
        h.update(b"\x1f")
    return h.hexdigest()


def _l2(v: npt.NDArray[np.floating[Any]]) -> npt.NDArray[np.floating[Any]]:
    norm = float(np.linalg.norm(v))
    return v / norm if norm > 0 else v


# ------------------------------------------------------------------------------------ cache


@dataclass
class CacheStats:
    """What one ``encode_cached`` call took from the cache and what it computed."""

    hits: int = 0
    computed: int = 0


class VectorCache:
    """Occurrence vectors on disk (one SQLite file), keyed by representation and input.

    Key: the representation's fingerprint (id, model, settings) and its ``input_key`` of the
    occurrence (hash of the sentence as the representation sees it, and the verb's position).
    """

    def __init__(self, path: str | Path) -> None:
        self.path = cache_file(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        try:
            self._db = sqlite3.connect(self.path)
            self._db.execute(
                "CREATE TABLE IF NOT EXISTS vectors (space TEXT NOT NULL, key TEXT NOT NULL, "
                "dim INTEGER NOT NULL, data BLOB NOT NULL, PRIMARY KEY (space, key))"
            )
            self._db.commit()
        except sqlite3.DatabaseError as error:
            raise InductionError(f"{self.path}: not a usable vector cache ({error})") from None

    def get_many(self, space: str, keys: Sequence[str]) -> dict[str, npt.NDArray[np.float32]]:
        return _select_vectors(self._db, space, list(dict.fromkeys(keys)))

    def put_many(self, space: str, items: Iterable[tuple[str, npt.NDArray[np.float32]]]) -> None:
        rows = [
            (space, key, int(v.size), np.ascontiguousarray(v, dtype=np.float32).tobytes())
            for key, v in items
        ]
        with self._db:
            self._db.executemany("INSERT OR REPLACE INTO vectors VALUES (?, ?, ?, ?)", rows)

    def __len__(self) -> int:
        return int(self._db.execute("SELECT COUNT(*) FROM vectors").fetchone()[0])

    def close(self) -> None:
        self._db.close()

    def __enter__(self) -> VectorCache:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

def cache_file(path: str | Path) -> Path:
    """The SQLite file of a vector cache given as a folder (or a suffix-less name) or a file."""
    where = Path(path)
    return where / "vectors.sqlite" if where.is_dir() or not where.suffix else where


def _select_vectors(
    db: sqlite3.Connection, space: str, keys: Sequence[str]
) -> dict[str, npt.NDArray[np.float32]]:
    found: dict[str, npt.NDArray[np.float32]] = {}
    for first in range(0, len(keys), 500):
        chunk = keys[first : first + 500]
        marks = ",".join("?" * len(chunk))
        rows = db.execute(
            f"SELECT key, dim, data FROM vectors WHERE space = ? AND key IN ({marks})",
            [space, *chunk],
        )
        for key, dim, data in rows:
            vector = np.frombuffer(data, dtype=np.float32)
            if vector.size == dim:
                found[key] = vector
    return found


# ------------------------------------------------------- cache shards of concurrent workers

SHARDS_DIR = "vector_shards"


# ---------------------------------------------------------------------------- vector cache


class WorkerVectorCache:
    """Reads the main cache file and this worker thread's shard; writes the shard only."""

    def __init__(self, folder: str) -> None:
        shard_dir = cache_file(folder).parent / SHARDS_DIR
        shard_dir.mkdir(parents=True, exist_ok=True)
        name = f"{socket.gethostname()}-{os.getpid()}-{threading.get_ident()}.sqlite"
        self.shard = VectorCache(shard_dir / name)
        main = cache_file(folder)
        # Read-only: a worker never writes the file every other worker reads.
        self.main = (
            sqlite3.connect(f"file:{main}?mode=ro", uri=True) if main.is_file() else None
        )

    def get_many(self, space: str, keys: Sequence[str]) -> dict[str, npt.NDArray[np.float32]]:
        unique = list(dict.fromkeys(keys))
        found = {} if self.main is None else _select_vectors(self.main, space, unique)
        rest = [key for key in unique if key not in found]
        if rest:
            found.update(self.shard.get_many(space, rest))
        return found

    def put_many(self, space: str, items: Iterable[tuple[str, npt.NDArray[np.float32]]]) -> None:
        self.shard.put_many(space, items)

    def close(self) -> None:
        self.shard.close()
        if self.main is not None:
            self.main.close()


def merge_vector_shards(folder: str | Path) -> int:
    """Merge the workers' cache shards into the main file, then remove them; rows added."""
    shard_dir = cache_file(folder).parent / SHARDS_DIR
    if not shard_dir.is_dir():
        return 0
    added = 0
    with VectorCache(folder) as cache:
        db = cache._db
        for shard in sorted(shard_dir.glob("*.sqlite")):
            before = db.total_changes
            db.execute("ATTACH DATABASE ? AS shard", (str(shard),))
            try:
                with db:
                    db.execute("INSERT OR IGNORE INTO vectors SELECT * FROM shard.vectors")
            except sqlite3.DatabaseError:
                pass  # a shard cut short by a dead worker: its vectors are computed again
            finally:
                db.execute("DETACH DATABASE shard")
            added += db.total_changes - before
            shard.unlink()
    shutil.rmtree(shard_dir, ignore_errors=True)
    return added


def encode_cached(
    representation: Representation,
    occurrences: Sequence[Occurrence],
    cache: VectorCache | None = None,
    *,
    stats: CacheStats | None = None,
    chunk: int = 512,
    progress: Progress | None = None,
) -> Matrix:
    """Vectors of ``occurrences``, taken from ``cache`` where present, computed otherwise."""
    if not occurrences:
        raise InductionError("no occurrences to encode")
    stats = stats if stats is not None else CacheStats()
    if cache is None:
        matrix = _encode(representation, occurrences, progress)
        stats.computed += len(occurrences)
        return _reweight(representation, matrix)
    space = fingerprint(representation)
    keys = [representation.input_key(occ) for occ in occurrences]
    found = cache.get_many(space, keys)
    missing = [i for i, key in enumerate(keys) if key not in found]
    stats.hits += len(occurrences) - len(missing)
    if progress is not None and len(occurrences) > len(missing):
        progress(len(occurrences) - len(missing))
    computed: dict[str, npt.NDArray[np.float32]] = {}
    for first in range(0, len(missing), chunk):
        part = [i for i in missing[first : first + chunk] if keys[i] not in computed]
        if not part:
            continue
        rows = _encode(representation, [occurrences[i] for i in part], progress)
        fresh = {keys[i]: rows[j] for j, i in enumerate(part)}
        cache.put_many(space, fresh.items())
        computed.update(fresh)
        stats.computed += len(part)
    vectors = {**found, **computed}
    matrix = np.stack([vectors[key] for key in keys]).astype(np.float32, copy=False)
    return _reweight(representation, matrix)


def _reweight(representation: Representation, matrix: Matrix) -> Matrix:
    """A representation whose weights depend on the verb's occurrences (substitutes: TF-IDF)
    caches raw rows and reweights them here, once all of the verb's rows are together."""
    reweight = getattr(representation, "reweight", None)
    return matrix if reweight is None else np.asarray(reweight(matrix), dtype=np.float32)


def _encode(
    representation: Representation, occurrences: Sequence[Occurrence], progress: Progress | None
) -> Matrix:
    import inspect

    if "progress" in inspect.signature(representation.encode).parameters:
        matrix = representation.encode(occurrences, progress=progress)  # type: ignore[call-arg]
    else:
        matrix = representation.encode(occurrences)
        if progress is not None:
            progress(len(occurrences))
    matrix = np.asarray(matrix, dtype=np.float32)
    if matrix.ndim != 2 or matrix.shape[0] != len(occurrences):
        raise InductionError(
            f"representation {representation.id!r} returned shape {matrix.shape} for "
            f"{len(occurrences)} occurrences"
        )
    return matrix


#: The one name of each representation: CLI choices, README, ``induction.json``,
#: ``calibration.json`` and sense provenance all use it (it is the representation's ``id``).
REPRESENTATIONS = ("static-syntactic", "transformer", "substitutes")
#: Names used by earlier versions, refused with the name that replaced them.
RENAMED_REPRESENTATIONS = {"static": "static-syntactic", "default": "static-syntactic"}


def canonical_representation_name(name: str, origin: str = "representation") -> str:
    """``name`` if it is a representation's one name; an error naming the right one otherwise."""
    if name in REPRESENTATIONS:
        return name
    if name in RENAMED_REPRESENTATIONS:
        raise InductionError(
            f"{origin}: the representation {name!r} is now called "
            f"{RENAMED_REPRESENTATIONS[name]!r}; use that name"
        )
    raise InductionError(
        f"{origin}: unknown representation {name!r}; expected one of {', '.join(REPRESENTATIONS)}"
    )


def load_representation(
    kind: str = "static-syntactic",
    model: str | Path | None = None,
    **options: Any,
) -> Representation:
    """A representation by its name: ``static-syntactic``, ``transformer`` or ``substitutes``
    (a masked language model's substitutes; lexbuild.senses.substitutes)."""
    kind = canonical_representation_name(kind)
    if kind == "static-syntactic":
        from lexbuild.senses.static import StaticSyntacticVectors

        if model is not None:
            options["package"] = str(model)
        return StaticSyntacticVectors(**options)
    if model is None:
        raise InductionError(
            f"the {kind} representation needs a model: a folder or a local cache id"
            + (" (with a masked-LM head)" if kind == "substitutes" else "")
        )
    if kind == "substitutes":
        from lexbuild.senses.substitutes import SubstituteVectors

        return SubstituteVectors(model, **options)
    from lexbuild.senses.transformer import TransformerEncoder

    return TransformerEncoder(model, **options)


def __getattr__(name: str) -> Any:
    # The embedded default and the encoder moved to their own modules (lexbuild.senses.static,
    # lexbuild.senses.transformer); the old import paths still work, lazily.
    if name == "StaticSyntacticVectors":
        from lexbuild.senses.static import StaticSyntacticVectors

        return StaticSyntacticVectors
    if name == "TransformerEncoder":
        from lexbuild.senses.transformer import TransformerEncoder

        return TransformerEncoder
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

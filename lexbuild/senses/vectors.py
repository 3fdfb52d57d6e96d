"""Occurrence vectors: one small interface, occurrences in, a float32 matrix out.

Two representations ship:

* ``StaticSyntacticVectors`` (the embedded default, offline), in ``lexbuild.senses.static``.
* ``TransformerEncoder``: a transformers encoder loaded from a local directory or the local
  Hugging Face cache (never downloaded): pre-tokenised words, the verb's word pieces pooled,
  a mix of hidden layers (mean of the last four by default), length-sorted batches, long
  sentences windowed around the verb, optional int8 dynamic quantisation.

``encode_cached`` puts a ``VectorCache`` (SQLite, one file) in front of any representation: a
vector is keyed by the representation's fingerprint (id, model, settings), a hash of what the
vector depends on in the sentence, and the verb's token span; re-running on the same corpus
recomputes nothing.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Protocol, runtime_checkable

import numpy as np
import numpy.typing as npt

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.errors import InductionError, ModelLoadError

__all__ = [
    "REPRESENTATIONS",
    "CacheStats",
    "Representation",
    "TransformerEncoder",
    "VectorCache",
    "canonical_representation_name",
    "encode_cached",
    "load_representation",
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


# ------------------------------------------------------------------------------ transformer

_OFFSET_POSITIONS = frozenset({"roberta", "xlm-roberta", "camembert", "longformer"})
_WEIGHT_FILES = ("model.safetensors", "pytorch_model.bin", "model.safetensors.index.json")


def _resolve_model_dir(path_or_id: str | Path, cache_dir: str | Path | None = None) -> Path:
    """A local folder as given, or the snapshot folder of a model in the local HF cache."""
    path = Path(path_or_id).expanduser()
    if path.is_dir():
        return path
    if path.exists():
        raise ModelLoadError(f"{path}: a model must be a folder (with config.json), not a file")
    try:
        from transformers.utils import cached_file

        config = cached_file(
            str(path_or_id),
            "config.json",
            cache_dir=str(cache_dir) if cache_dir is not None else None,
            local_files_only=True,
        )
    except Exception as error:  # transformers raises OSError/EnvironmentError variants
        raise ModelLoadError(
            f"model {str(path_or_id)!r} is neither a folder nor in the local Hugging Face cache "
            f"(nothing is downloaded at run time): {error}"
        ) from None
    if config is None:
        raise ModelLoadError(f"model {str(path_or_id)!r}: no config.json in the local cache")
    return Path(config).parent


def _model_fingerprint(folder: Path) -> str:
    """Content hash of the config and weights: two copies of one model share a cache."""
    h = hashlib.sha256()
    names = ["config.json", *_WEIGHT_FILES]
    names += sorted(p.name for p in folder.glob("*.safetensors") if p.name not in names)
    for name in names:
        file = folder / name
        if file.is_file():
            h.update(name.encode())
            with open(file, "rb") as handle:
                for chunk in iter(lambda: handle.read(1 << 20), b""):
                    h.update(chunk)
    return h.hexdigest()[:16]


def _window_bounds(pieces: Sequence[int], verb: int, budget: int) -> tuple[int, int]:
    """Words [start, end) around ``verb`` whose word pieces fit in ``budget``.

    Grows one word at a time, alternately right and left, so the verb stays near the middle.
    """
    start, end = verb, verb + 1
    used = pieces[verb]
    if used > budget:
        return start, end
    grew = True
    while grew:
        grew = False
        for side in (1, -1):
            if side == 1 and end < len(pieces) and used + pieces[end] <= budget:
                used += pieces[end]
                end += 1
                grew = True
            elif side == -1 and start > 0 and used + pieces[start - 1] <= budget:
                start -= 1
                used += pieces[start]
                grew = True
    return start, end


class TransformerEncoder:
    """Contextual vectors of the verb from a transformers encoder on disk.

    ``model``: a folder (``save_pretrained`` output) or the id of a model already in the local
    Hugging Face cache (``cache_dir`` overrides where that cache is); loading never downloads
    (``local_files_only=True``).
    ``layers``: hidden-state indices mixed by their mean (``hidden_states[0]`` is the embedding
    layer); default the last four. ``max_length``: word pieces per input, special tokens
    included; longer sentences are cut to a window of words around the verb.
    """

    def __init__(
        self,
        model: str | Path,
        *,
        layers: Sequence[int] = (-4, -3, -2, -1),
        batch_size: int = 32,
        max_length: int = 256,
        num_threads: int | None = None,
        quantize: bool = False,
        device: str = "cpu",
        cache_dir: str | Path | None = None,
    ) -> None:
        if batch_size < 1 or max_length < 8:
            raise InductionError("batch_size must be >= 1 and max_length >= 8")
        if not layers:
            raise InductionError("layers must name at least one hidden layer")
        self.source = str(model)
        self.folder = _resolve_model_dir(model, cache_dir)
        # A folder is named by its own name, a cached model by its hub id ("org/name").
        self._name = self.folder.name if Path(model).expanduser().is_dir() else str(model)
        self.layers = tuple(int(x) for x in layers)
        self.batch_size = batch_size
        self.max_length = max_length
        self.num_threads = num_threads
        self.quantize = quantize
        self.device = device
        self._fingerprint = _model_fingerprint(self.folder)
        self._load()

    def _load(self) -> None:
        try:
            import torch
            from transformers import AutoModel, AutoTokenizer
        except ImportError as error:  # pragma: no cover - depends on the environment
            raise ModelLoadError(
                "the transformer representation needs torch and transformers: "
                "pip install 'lexbuild[transformer]'"
            ) from error
        if self.num_threads:
            torch.set_num_threads(self.num_threads)
        try:
            tokenizer = AutoTokenizer.from_pretrained(self.folder, local_files_only=True)
            model = AutoModel.from_pretrained(self.folder, local_files_only=True)
        except (OSError, ValueError) as error:
            raise ModelLoadError(
                f"cannot load a transformers model from {self.folder}: {error}"
            ) from None
        if not getattr(tokenizer, "is_fast", False):
            raise ModelLoadError(
                f"{self.folder}: the tokenizer is not a fast tokenizer (tokenizer.json); word "
                "pieces cannot be mapped back to words without one"
            )
        model.eval()
        if self.quantize:
            import warnings

            with warnings.catch_warnings():
                # torch 2.x marks eager dynamic quantisation deprecated (torchao replaces it);
                # it still works and needs no extra package.
                warnings.simplefilter("ignore", DeprecationWarning)
                warnings.simplefilter("ignore", UserWarning)
                model = torch.ao.quantization.quantize_dynamic(
                    model, {torch.nn.Linear}, dtype=torch.qint8
                )
        model.to(self.device)
        n_hidden = int(model.config.num_hidden_layers) + 1
        resolved = sorted({i % n_hidden for i in self.layers if -n_hidden <= i < n_hidden})
        if not resolved:
            raise InductionError(
                f"layers {list(self.layers)} name none of the {n_hidden} hidden states "
                f"(0 = embeddings .. {n_hidden - 1} = last layer)"
            )
        self._resolved_layers = tuple(resolved)
        # Never feed more positions than the model has: RoBERTa-style models (CamemBERT...)
        # offset their positions by the padding index, so two positions are not usable.
        limit = int(getattr(model.config, "max_position_embeddings", 0) or self.max_length)
        if getattr(model.config, "model_type", "") in _OFFSET_POSITIONS:
            limit -= 2
        tokenizer_limit = int(getattr(tokenizer, "model_max_length", 0) or 0)
        if 0 < tokenizer_limit < 100_000:
            limit = min(limit, tokenizer_limit)
        self.max_length = max(8, min(self.max_length, limit))
        self._tokenizer = tokenizer
        self._model = model
        self._torch = torch

    # -- Representation protocol
    @property
    def id(self) -> str:
        return "transformer"

    @property
    def model(self) -> str:
        return f"{self._name}@{self._fingerprint}"

    @property
    def settings(self) -> dict[str, Any]:
        # batch_size and num_threads change speed, not the vectors: left out of the key.
        return {
            "layers": list(self._resolved_layers),
            "max_length": self.max_length,
            "quantize": self.quantize,
            "pooling": "mean of the verb's word pieces",
        }

    @property
    def placeholder(self) -> str:
        mask = getattr(self._tokenizer, "mask_token", None)
        return str(mask) if mask else str(self._tokenizer.unk_token or "X")

    @property
    def dimension(self) -> int:
        return int(self._model.config.hidden_size)

    def input_key(self, occurrence: Occurrence) -> str:
        return _digest("\x1e".join(occurrence.words), str(occurrence.token))

    # -- encoding
    def _prepare(self, occurrences: Sequence[Occurrence]) -> list[tuple[list[str], int, int]]:
        """Per occurrence: the words fed to the model, the verb's index, their piece count.

        One tokenizer call for all sentences, pieces counted per word from ``word_ids`` (so a
        BPE tokenizer's word-initial space is counted as it will be in the real input).
        """
        tok = self._tokenizer
        budget = self.max_length - tok.num_special_tokens_to_add(pair=False)
        words = [list(occ.words) for occ in occurrences]
        encoded = tok(words, is_split_into_words=True, add_special_tokens=False)
        prepared = []
        for index, occ in enumerate(occurrences):
            total = len(encoded["input_ids"][index])
            if total <= budget:
                prepared.append((words[index], occ.token, total))
                continue
            pieces = [0] * len(words[index])
            for word in encoded.word_ids(index):
                if word is not None:
                    pieces[word] += 1
            start, end = _window_bounds(pieces, occ.token, budget)
            prepared.append((words[index][start:end], occ.token - start, sum(pieces[start:end])))
        return prepared

    def encode(
        self, occurrences: Sequence[Occurrence], progress: Progress | None = None
    ) -> Matrix:
        torch = self._torch
        if self.num_threads:
            torch.set_num_threads(self.num_threads)
        prepared = self._prepare(occurrences)
        # Length-sorted batches: little padding, so little wasted compute.
        order = sorted(range(len(prepared)), key=lambda i: (prepared[i][2], i))
        out = np.zeros((len(prepared), self.dimension), dtype=np.float32)
        for first in range(0, len(order), self.batch_size):
            batch = order[first : first + self.batch_size]
            encoded = self._tokenizer(
                [prepared[i][0] for i in batch],
                is_split_into_words=True,
                padding=True,
                truncation=True,
                max_length=self.max_length,
                return_tensors="pt",
            )
            with torch.inference_mode():
                result = self._model(
                    **{k: v.to(self.device) for k, v in encoded.items()},
                    output_hidden_states=True,
                )
            states = result.hidden_states
            mixed = torch.stack([states[i] for i in self._resolved_layers]).mean(dim=0)
            mixed = mixed.float().cpu().numpy()
            for row, index in enumerate(batch):
                verb = prepared[index][1]
                word_ids = encoded.word_ids(row)
                pieces = [t for t, w in enumerate(word_ids) if w == verb]
                if not pieces:  # the tokenizer dropped the verb's characters entirely
                    pieces = [t for t, w in enumerate(word_ids) if w is not None] or [0]
                out[index] = _l2(mixed[row, pieces].mean(axis=0))
            if progress is not None:
                progress(len(batch))
        return out


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
        self.path = Path(path)
        if self.path.is_dir() or not self.path.suffix:
            self.path.mkdir(parents=True, exist_ok=True)
            self.path = self.path / "vectors.sqlite"
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
        found: dict[str, npt.NDArray[np.float32]] = {}
        unique = list(dict.fromkeys(keys))
        for first in range(0, len(unique), 500):
            chunk = unique[first : first + 500]
            marks = ",".join("?" * len(chunk))
            rows = self._db.execute(
                f"SELECT key, dim, data FROM vectors WHERE space = ? AND key IN ({marks})",
                [space, *chunk],
            )
            for key, dim, data in rows:
                vector = np.frombuffer(data, dtype=np.float32)
                if vector.size == dim:
                    found[key] = vector
        return found

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
        return matrix
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
    return np.stack([vectors[key] for key in keys]).astype(np.float32, copy=False)


def _encode(
    representation: Representation, occurrences: Sequence[Occurrence], progress: Progress | None
) -> Matrix:
    if isinstance(representation, TransformerEncoder):
        matrix = representation.encode(occurrences, progress=progress)
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
REPRESENTATIONS = ("static-syntactic", "transformer")
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
    """A representation by its name: ``static-syntactic`` or ``transformer``."""
    kind = canonical_representation_name(kind)
    if kind == "static-syntactic":
        from lexbuild.senses.static import StaticSyntacticVectors

        if model is not None:
            options["package"] = str(model)
        return StaticSyntacticVectors(**options)
    if model is None:
        raise InductionError(
            "the transformer representation needs a model: a folder or a local cache id"
        )
    return TransformerEncoder(model, **options)


def __getattr__(name: str) -> Any:
    # The embedded default moved to lexbuild.senses.static; the old import path still works.
    if name == "StaticSyntacticVectors":
        from lexbuild.senses.static import StaticSyntacticVectors

        return StaticSyntacticVectors
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

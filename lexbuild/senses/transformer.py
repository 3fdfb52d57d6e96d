"""The transformer encoder: contextual vectors of a verb from a transformers model on disk.

A model is loaded from a local folder or the local Hugging Face cache (never downloaded):
pre-tokenised words, the verb's word pieces pooled, a mix of hidden layers (mean of the last
four by default), length-sorted batches, long sentences windowed around the verb, optional int8
dynamic quantisation.
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.errors import InductionError, ModelLoadError
from lexbuild.senses.vectors import Matrix, Progress, _digest, _l2

__all__ = ["TransformerEncoder"]


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

"""The transformer encoder: contextual vectors of a verb from a transformers model on disk.

A model is loaded from a local folder or the local Hugging Face cache (never downloaded):
pre-tokenised words, the verb's word pieces pooled, a mix of hidden layers (mean of the last
four by default, or chosen by calibration on pseudo-verbs), length-sorted batches, long
sentences windowed around the verb, optional int8 dynamic quantisation.

Word pieces: the model must see each pre-split word as it saw it in running text, after a
space. ``PieceAligner`` checks this on probe words and fixes the two conventions a tokenizer
file may get wrong for pre-split input: byte-level BPE (RoBERTa, ModernBERT: ``Ġ`` via
``add_prefix_space``) and SentencePiece (CamemBERT, XLM-RoBERTa, DeBERTa-v2: ``▁`` on every
word). WordPiece (BERT, ``##``) and XLM-style BPE (FlauBERT, ``</w>``, a Python tokenizer read
word by word) need nothing. Only the pieces that carry the verb's characters are pooled: a
SentencePiece word often starts with a lone ``▁`` piece, which is fed to the model but not
pooled; special tokens belong to no word and are never pooled.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.errors import InductionError, ModelLoadError, PieceAlignmentError
from lexbuild.senses.vectors import Matrix, Progress, _digest

__all__ = [
    "LayerChoice",
    "PieceAligner",
    "TransformerEncoder",
    "choose_layers",
    "layer_mixes",
    "load_model_folder",
]


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


# ----------------------------------------------------------------------------- word pieces

#: Words tokenised once at load time to check the tokenizer's convention for pre-split input.
PROBE_WORDS = ("pêcheur", "répare", "huîtres", "Brévenn", "l'", "aujourd'hui", "mange", ".")


def _walk(node: Any) -> list[dict[str, Any]]:
    """Every component of a pre-tokenizer's JSON (a Sequence nests others)."""
    if not isinstance(node, dict):
        return []
    found = [node]
    for child in node.get("pretokenizers", []) or []:
        found += _walk(child)
    return found


def _backend_json(tokenizer: Any) -> dict[str, Any]:
    return dict(json.loads(tokenizer.backend_tokenizer.to_str()))


def _convention(tokenizer: Any) -> str:
    """The family of word pieces: wordpiece, sentencepiece, byte-level, xlm-bpe or other."""
    if not getattr(tokenizer, "is_fast", False):
        return "per-word"
    data = _backend_json(tokenizer)
    kinds = {part.get("type") for part in _walk(data.get("pre_tokenizer"))}
    model = data.get("model") or {}
    if "ByteLevel" in kinds:
        return "byte-level"
    if "Metaspace" in kinds:
        return "sentencepiece"
    if model.get("type") == "WordPiece":
        return "wordpiece"
    if model.get("type") == "BPE" and model.get("end_of_word_suffix"):
        return "xlm-bpe"
    return str(model.get("type") or "other").lower()


def _prefix_every_word(tokenizer: Any) -> bool:
    """Make a fast tokenizer mark every pre-split word as following a space; True if changed.

    Byte-level BPE needs ``add_prefix_space`` (RoBERTa's own advice for pre-split input);
    SentencePiece needs the ``▁`` prepended to every word, not the first only.
    """
    from tokenizers import Tokenizer

    data = _backend_json(tokenizer)
    changed = False
    for part in _walk(data.get("pre_tokenizer")):
        if part.get("type") == "ByteLevel" and not part.get("add_prefix_space"):
            part["add_prefix_space"] = True
            changed = True
        elif part.get("type") == "Metaspace" and part.get("prepend_scheme") not in (None, "always"):
            part["prepend_scheme"] = "always"
            changed = True
    if changed:
        tokenizer.backend_tokenizer.pre_tokenizer = Tokenizer.from_str(
            json.dumps(data)
        ).pre_tokenizer
        if hasattr(tokenizer, "add_prefix_space"):
            tokenizer.add_prefix_space = True
    return changed


class PieceAligner:
    """Word pieces of pre-split words, as the model saw those words in running text.

    ``pieces`` gives the piece ids of each word of each sentence (no special tokens);
    ``frame`` wraps a sentence's pieces in the model's special tokens; ``carries_characters``
    tells a piece with some of the word's characters from a bare space marker (``▁``, ``Ġ``).
    Raises ``PieceAlignmentError`` when the tokenizer splits a word differently alone than in
    running text and no known convention fixes it.
    """

    def __init__(self, tokenizer: Any, source: str | Path = "") -> None:
        self.tokenizer = tokenizer
        self.fast = bool(getattr(tokenizer, "is_fast", False))
        self.source = str(source)
        if self.fast:
            _prefix_every_word(tokenizer)
        elif not all(hasattr(tokenizer, name) for name in
                     ("tokenize", "convert_tokens_to_ids", "build_inputs_with_special_tokens")):
            raise PieceAlignmentError(
                f"{self.source}: the tokenizer {type(tokenizer).__name__} has neither a fast "
                "backend (tokenizer.json) nor word-by-word tokenisation; its pieces cannot be "
                "mapped back to words"
            )
        self.convention = _convention(tokenizer)
        self._words: dict[str, list[int]] = {}
        self._carries: dict[int, bool] = {}
        self.prefix, self.suffix = self._special_frame()
        self._check()

    # -- pieces
    def _word_pieces_slow(self, word: str) -> list[int]:
        ids = self._words.get(word)
        if ids is None:
            tok = self.tokenizer
            ids = [int(i) for i in tok.convert_tokens_to_ids(tok.tokenize(word))]
            self._words[word] = ids
        return ids

    def pieces(self, sentences: Sequence[Sequence[str]]) -> list[list[list[int]]]:
        """Piece ids of every word of every sentence (one tokenizer call when fast)."""
        if not sentences:
            return []
        if not self.fast:
            return [[self._word_pieces_slow(w) for w in words] for words in sentences]
        encoded = self.tokenizer(
            [list(words) for words in sentences],
            is_split_into_words=True,
            add_special_tokens=False,
        )
        out: list[list[list[int]]] = []
        for index, words in enumerate(sentences):
            grouped: list[list[int]] = [[] for _ in words]
            ids = encoded["input_ids"][index]
            for piece, word in zip(ids, encoded.word_ids(index), strict=True):
                if word is not None:
                    grouped[word].append(int(piece))
            out.append(grouped)
        return out

    def _special_frame(self) -> tuple[list[int], list[int]]:
        """Special tokens before and after a single sentence's pieces ([CLS] ... [SEP])."""
        tok = self.tokenizer
        if self.fast:
            encoded = tok(["a"], is_split_into_words=True, add_special_tokens=True)
            ids, words = encoded["input_ids"], encoded.word_ids(0)
            inside = [i for i, w in enumerate(words) if w is not None]
            if not inside:
                raise PieceAlignmentError(f"{self.source}: the tokenizer drops the word 'a'")
            return [int(i) for i in ids[: inside[0]]], [int(i) for i in ids[inside[-1] + 1 :]]
        content = self._word_pieces_slow("a")
        built = [int(i) for i in tok.build_inputs_with_special_tokens(content)]
        for start in range(len(built) - len(content) + 1):
            if built[start : start + len(content)] == content:
                return built[:start], built[start + len(content) :]
        raise PieceAlignmentError(
            f"{self.source}: cannot find a sentence's pieces among its special tokens"
        )

    def frame(self, pieces: Sequence[int]) -> list[int]:
        return [*self.prefix, *pieces, *self.suffix]

    def carries_characters(self, piece: int) -> bool:
        """False for a piece that decodes to nothing but space (a lone ``▁`` or ``Ġ``)."""
        known = self._carries.get(piece)
        if known is None:
            tok = self.tokenizer
            text = tok.convert_tokens_to_string([tok.convert_ids_to_tokens(piece)])
            known = bool(str(text).strip())
            self._carries[piece] = known
        return known

    def _check(self) -> None:
        """Each probe word must get the same pieces alone as after a space in running text."""
        tok = self.tokenizer
        lead = tok("a", add_special_tokens=False)["input_ids"] if self.fast else (
            tok.convert_tokens_to_ids(tok.tokenize("a"))
        )
        alone = self.pieces([["a", word] for word in PROBE_WORDS])
        for word, words in zip(PROBE_WORDS, alone, strict=True):
            if self.fast:
                running = tok("a " + word, add_special_tokens=False)["input_ids"]
            else:
                running = tok.convert_tokens_to_ids(tok.tokenize("a " + word))
            running = [int(i) for i in running]
            if running[: len(lead)] != [int(i) for i in lead] or running[len(lead) :] != words[1]:
                raise PieceAlignmentError(
                    f"{self.source}: the tokenizer ({type(tok).__name__}, {self.convention} "
                    f"pieces) splits {word!r} into {tok.convert_ids_to_tokens(words[1])} as a "
                    f"word but into {tok.convert_ids_to_tokens(running[len(lead):])} after a "
                    "space in running text: its pieces cannot be mapped back to words"
                )


def load_model_folder(folder: Path, auto_class: str = "AutoModel") -> tuple[Any, Any]:
    """Tokenizer and model of a local folder (never downloaded); errors as ModelLoadError."""
    try:
        import transformers
    except ImportError as error:  # pragma: no cover - depends on the environment
        raise ModelLoadError(
            "this representation needs torch and transformers: pip install 'lexbuild[transformer]'"
        ) from error
    verbosity = transformers.logging.get_verbosity()
    # A folder saved with a masked-LM head loads as an encoder with a report of unused
    # weights: expected here, so not printed.
    transformers.logging.set_verbosity_error()
    try:
        tokenizer = transformers.AutoTokenizer.from_pretrained(folder, local_files_only=True)
        model = getattr(transformers, auto_class).from_pretrained(folder, local_files_only=True)
    except (OSError, ValueError, ImportError) as error:
        raise ModelLoadError(f"cannot load a transformers model from {folder}: {error}") from None
    finally:
        transformers.logging.set_verbosity(verbosity)
    return tokenizer, model


# ----------------------------------------------------------------------------- layer choice


def layer_mixes(hidden_states: int) -> list[tuple[int, ...]]:
    """Candidate layer mixes for a model with ``hidden_states`` states (embeddings = 0).

    The default (last four) first, so that it wins ties; then each single layer, the last
    two, the middle third and all layers (the embeddings are never a candidate on their own).
    """
    last = hidden_states - 1
    if last < 1:
        return [(0,)]
    mixes = [tuple(range(max(1, last - 3), last + 1))]
    mixes += [(i,) for i in range(1, last + 1)]
    mixes.append(tuple(range(max(1, last - 1), last + 1)))
    third = max(1, last // 3)
    mixes.append(tuple(range(third, min(last, 2 * third) + 1)))
    mixes.append(tuple(range(1, last + 1)))
    return list(dict.fromkeys(mixes))


@dataclass(frozen=True)
class LayerChoice:
    """The layer mix chosen on pseudo-verbs, with every candidate's score."""

    layers: tuple[int, ...]
    scores: tuple[tuple[tuple[int, ...], float, float], ...]  # mix, best mean ARI, threshold

    def to_json(self) -> dict[str, Any]:
        return {
            "chosen": list(self.layers),
            "criterion": "best mean adjusted Rand index over the swept thresholds",
            "candidates": [
                {"layers": list(mix), "ari": round(ari, 6), "threshold": threshold}
                for mix, ari, threshold in self.scores
            ],
        }


def choose_layers(
    encoder: TransformerEncoder,
    samples: Sequence[tuple[Sequence[Occurrence], Sequence[str]]],
    sweep: Callable[[Matrix, Sequence[str]], Sequence[float]],
    thresholds: Sequence[float],
    *,
    candidates: Sequence[Sequence[int]] | None = None,
) -> LayerChoice:
    """Score layer mixes on pseudo-verbs and set the best one on ``encoder``.

    ``samples``: each pseudo-verb's occurrences (verb masked) and gold verbs; ``sweep(X,
    gold)``: the ARI at each of ``thresholds`` (calibration's own clusterer). One forward pass
    per occurrence gives every layer; each mix is the mean of its layers, L2-normalised.
    """
    if not samples:
        raise InductionError("no pseudo-verb to choose layers on")
    mixes = [tuple(m) for m in (candidates or layer_mixes(encoder.hidden_states))]
    per_layer = [encoder.encode_layers(occs) for occs, _gold in samples]
    scored: list[tuple[tuple[int, ...], float, float]] = []
    for mix in mixes:
        rows = []
        for states, (_occs, gold) in zip(per_layer, samples, strict=True):
            mixed = states[:, list(mix)].mean(axis=1)
            norms = np.linalg.norm(mixed, axis=1, keepdims=True)
            X = np.asarray(mixed / np.where(norms > 0, norms, 1.0), dtype=np.float32)
            rows.append(list(sweep(X, gold)))
        means = np.mean(np.asarray(rows, dtype=np.float64), axis=0)
        best = int(np.argmax(np.round(means, 12)))  # first best: the smallest threshold
        scored.append((mix, float(means[best]), float(thresholds[best])))
    chosen = max(scored, key=lambda row: round(row[1], 12))  # first best: default wins ties
    encoder.use_layers(chosen[0])
    return LayerChoice(layers=chosen[0], scores=tuple(scored))


class TransformerEncoder:
    """Contextual vectors of the verb from a transformers encoder on disk.

    ``model``: a folder (``save_pretrained`` output) or the id of a model already in the local
    Hugging Face cache (``cache_dir`` overrides where that cache is); loading never downloads
    (``local_files_only=True``).
    ``layers``: hidden-state indices mixed by their mean (``hidden_states[0]`` is the embedding
    layer); default the last four; ``"auto"``: chosen by calibration on pseudo-verbs
    (``choose_layers``), the encoder refuses to encode until then. ``max_length``: word pieces
    per input, special tokens included; longer sentences are cut to a window of words around
    the verb.
    """

    def __init__(
        self,
        model: str | Path,
        *,
        layers: Sequence[int] | str = (-4, -3, -2, -1),
        batch_size: int = 32,
        max_length: int = 256,
        num_threads: int | None = None,
        quantize: bool = False,
        device: str = "cpu",
        cache_dir: str | Path | None = None,
    ) -> None:
        if batch_size < 1 or max_length < 8:
            raise InductionError("batch_size must be >= 1 and max_length >= 8")
        if isinstance(layers, str) and layers != "auto":
            raise InductionError(f"layers {layers!r}: expected indices or 'auto'")
        if not layers:
            raise InductionError("layers must name at least one hidden layer")
        self.source = str(model)
        self.folder = _resolve_model_dir(model, cache_dir)
        # A folder is named by its own name, a cached model by its hub id ("org/name").
        self._name = self.folder.name if Path(model).expanduser().is_dir() else str(model)
        self.needs_layer_choice = layers == "auto"
        self.layers: tuple[int, ...] = () if isinstance(layers, str) else tuple(
            int(x) for x in layers
        )
        self.batch_size = batch_size
        self.max_length = max_length
        self.num_threads = num_threads
        self.quantize = quantize
        self.device = device
        self._fingerprint = _model_fingerprint(self.folder)
        self._load()

    def _load(self) -> None:
        import torch

        if self.num_threads:
            torch.set_num_threads(self.num_threads)
        tokenizer, model = load_model_folder(self.folder)
        self._aligner = PieceAligner(tokenizer, self.folder)
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
        config = model.config
        depth = getattr(config, "num_hidden_layers", None) or getattr(config, "n_layers", 0)
        self.hidden_states = int(depth or 0) + 1
        self._resolved_layers: tuple[int, ...] = ()
        if not self.needs_layer_choice:
            self.use_layers(self.layers)
        # Never feed more positions than the model has: RoBERTa-style models (CamemBERT...)
        # offset their positions by the padding index, so two positions are not usable.
        limit = int(getattr(config, "max_position_embeddings", 0) or self.max_length)
        if getattr(config, "model_type", "") in _OFFSET_POSITIONS:
            limit -= 2
        tokenizer_limit = int(getattr(tokenizer, "model_max_length", 0) or 0)
        if 0 < tokenizer_limit < 100_000:
            limit = min(limit, tokenizer_limit)
        self.max_length = max(8, min(self.max_length, limit))
        self._tokenizer = tokenizer
        self._model = model
        self._torch = torch
        pad = tokenizer.pad_token_id
        self._pad = int(pad) if pad is not None else 0

    def use_layers(self, layers: Sequence[int]) -> None:
        """Mix these hidden states from now on (indices may be negative)."""
        n_hidden = self.hidden_states
        resolved = sorted({int(i) % n_hidden for i in layers if -n_hidden <= int(i) < n_hidden})
        if not resolved:
            raise InductionError(
                f"layers {list(layers)} name none of the {n_hidden} hidden states "
                f"(0 = embeddings .. {n_hidden - 1} = last layer)"
            )
        self._resolved_layers = tuple(resolved)
        self.needs_layer_choice = False

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
            "layers": list(self._resolved_layers) if self._resolved_layers else "auto",
            "max_length": self.max_length,
            "quantize": self.quantize,
            "pooling": "mean of the verb's pieces that carry its characters",
            "pieces": self._aligner.convention,
        }

    @property
    def placeholder(self) -> str:
        mask = getattr(self._tokenizer, "mask_token", None)
        return str(mask) if mask else str(self._tokenizer.unk_token or "X")

    @property
    def dimension(self) -> int:
        config = self._model.config
        return int(getattr(config, "hidden_size", None) or config.emb_dim)

    def input_key(self, occurrence: Occurrence) -> str:
        return _digest("\x1e".join(occurrence.words), str(occurrence.token))

    # -- encoding
    def _prepare(
        self, occurrences: Sequence[Occurrence]
    ) -> list[tuple[list[int], list[int], list[int]]]:
        """Per occurrence: input ids (special tokens included), positions pooled, verb's own.

        One tokenizer call for all sentences; a sentence longer than ``max_length`` is cut to
        a window of whole words around the verb. Pooled: the verb's pieces that carry its
        characters (all of its pieces if none does; the sentence's if the verb has none).
        """
        aligner = self._aligner
        budget = self.max_length - len(aligner.prefix) - len(aligner.suffix)
        words = aligner.pieces([occ.words for occ in occurrences])
        prepared = []
        for occ, pieces in zip(occurrences, words, strict=True):
            verb = occ.token
            counts = [len(p) for p in pieces]
            start, end = 0, len(pieces)
            if sum(counts) > budget:
                start, end = _window_bounds(counts, verb, budget)
            kept = pieces[start:end]
            flat = [piece for word in kept for piece in word][:budget]
            first = sum(counts[start:verb])  # the verb's first piece in ``flat``
            own = [first + j for j in range(counts[verb]) if first + j < len(flat)]
            pooled = [i for i in own if aligner.carries_characters(flat[i])] or own
            if not pooled:  # the tokenizer dropped the verb's characters entirely
                pooled = list(range(len(flat)))
            offset = len(aligner.prefix)
            positions = [offset + i for i in pooled] or [0]
            prepared.append((aligner.frame(flat), positions, [offset + i for i in own]))
        return prepared

    def verb_pieces(
        self, occurrences: Sequence[Occurrence], *, all_pieces: bool = False
    ) -> list[list[str]]:
        """The pieces pooled for each occurrence's verb (``all_pieces``: all of its word's)."""
        tok = self._tokenizer
        out = []
        for ids, pooled, own in self._prepare(occurrences):
            chosen = own if all_pieces else pooled
            out.append([str(tok.convert_ids_to_tokens(ids[p])) for p in chosen])
        return out

    def _pooled(
        self, occurrences: Sequence[Occurrence], layers: Sequence[int], progress: Progress | None
    ) -> npt.NDArray[np.float32]:
        """(occurrences, layers, dimension): each layer's mean over the pooled positions."""
        torch = self._torch
        if self.num_threads:
            torch.set_num_threads(self.num_threads)
        prepared = self._prepare(occurrences)
        # Length-sorted batches: little padding, so little wasted compute.
        order = sorted(range(len(prepared)), key=lambda i: (len(prepared[i][0]), i))
        out = np.zeros((len(prepared), len(layers), self.dimension), dtype=np.float32)
        for first in range(0, len(order), self.batch_size):
            batch = order[first : first + self.batch_size]
            width = max(len(prepared[i][0]) for i in batch)
            ids = torch.full((len(batch), width), self._pad, dtype=torch.long)
            mask = torch.zeros((len(batch), width), dtype=torch.long)
            for row, index in enumerate(batch):
                row_ids = prepared[index][0]
                ids[row, : len(row_ids)] = torch.tensor(row_ids, dtype=torch.long)
                mask[row, : len(row_ids)] = 1
            with torch.inference_mode():
                result = self._model(
                    input_ids=ids.to(self.device),
                    attention_mask=mask.to(self.device),
                    output_hidden_states=True,
                )
            states = torch.stack([result.hidden_states[i] for i in layers]).float().cpu().numpy()
            for row, index in enumerate(batch):
                out[index] = states[:, row, prepared[index][1]].mean(axis=1)
            if progress is not None:
                progress(len(batch))
        return out

    def encode_layers(self, occurrences: Sequence[Occurrence]) -> npt.NDArray[np.float32]:
        """Every hidden state's pooled vector: (occurrences, hidden states, dimension)."""
        return self._pooled(occurrences, range(self.hidden_states), None)

    def encode(
        self, occurrences: Sequence[Occurrence], progress: Progress | None = None
    ) -> Matrix:
        if self.needs_layer_choice:
            raise InductionError(
                "--layers auto: the layer mix is chosen by calibration on pseudo-verbs; run "
                "'lexbuild calibrate --layers auto' and pass its calibration.json, or give layers"
            )
        pooled = self._pooled(occurrences, self._resolved_layers, progress).mean(axis=1)
        norms = np.linalg.norm(pooled, axis=1, keepdims=True)
        return np.asarray(pooled / np.where(norms > 0, norms, 1.0), dtype=np.float32)

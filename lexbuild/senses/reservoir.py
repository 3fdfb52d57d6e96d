"""Per-verb occurrence caps applied while reading: reservoir sampling with fixed priorities.

Every occurrence gets a priority, a 64-bit hash of (``random_state``, corpus, sentence id,
token index); each verb keeps the ``cap`` occurrences with the smallest priorities seen so far
(bottom-k sampling, also called priority sampling or reservoir sampling with fixed random
keys: Efraimidis and Spirakis 2006 with equal weights; Cohen and Kaplan 2007 for bottom-k
sketches). Because the priority depends on the occurrence alone, never on the reading order:

* the sample is uniform over the verb's occurrences and fixed by ``random_state``;
* it is the same whatever the file order or the cut into shards;
* samples of shards merge: the bottom-k of the union is the bottom-k of the shards' bottom-k.

A reservoir holds at most ``cap`` occurrences, so reading a corpus holds at most ``cap`` per
verb whatever its size. It also counts every occurrence and sums a digest of each (modulo
2**128, which is order-free as well) so that the run id covers all occurrences, not only the
sample, without keeping them.
"""

from __future__ import annotations

import hashlib
import heapq
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, field

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.senses.examples import corpus_name

__all__ = [
    "CorpusSample",
    "VerbReservoir",
    "occurrence_priority",
    "occurrence_ref",
    "sample_corpus",
]

_DIGEST_MODULUS = 1 << 128


def occurrence_ref(occurrence: Occurrence) -> tuple[str, str, int]:
    """(corpus, sentence id, 0-based token): what names an occurrence whatever the file path."""
    return corpus_name(occurrence.source), occurrence.sentence_id, occurrence.token


def occurrence_priority(random_state: int, occurrence: Occurrence) -> int:
    """The occurrence's fixed random priority (smaller: sampled first)."""
    corpus, sentence, token = occurrence_ref(occurrence)
    data = f"{random_state}\x1f{corpus}\x1f{sentence}\x1f{token}".encode()
    return int.from_bytes(hashlib.blake2b(data, digest_size=8).digest(), "big")


def _digest(occurrence: Occurrence, input_key: str) -> int:
    corpus, sentence, token = occurrence_ref(occurrence)
    data = f"{corpus}\x1f{sentence}\x1f{token}\x1f{input_key}".encode()
    return int.from_bytes(hashlib.sha256(data).digest()[:16], "big")


Priority = tuple[int, tuple[str, str, int]]  # (hash, reference): ties broken by reference


class _Held:
    """A sampled occurrence in the reservoir's heap, which keeps the largest priority on top
    (the first to leave when a smaller one comes)."""

    __slots__ = ("occurrence", "priority")

    def __init__(self, priority: Priority, occurrence: Occurrence) -> None:
        self.priority = priority
        self.occurrence = occurrence

    def __lt__(self, other: _Held) -> bool:
        return self.priority > other.priority


@dataclass
class VerbReservoir:
    """The ``cap`` occurrences of one verb with the smallest priorities, and its totals."""

    cap: int
    count: int = 0  # occurrences seen, sampled or not
    digest: int = 0  # sum of the occurrences' digests modulo 2**128
    _heap: list[_Held] = field(default_factory=list)

    def offer(self, occurrence: Occurrence, priority: int, digest: int = 0) -> None:
        self.count += 1
        self.digest = (self.digest + digest) % _DIGEST_MODULUS
        self._keep(_Held((priority, occurrence_ref(occurrence)), occurrence))

    def _keep(self, held: _Held) -> None:
        if len(self._heap) < self.cap:
            heapq.heappush(self._heap, held)
        elif held.priority < self._heap[0].priority:
            heapq.heapreplace(self._heap, held)

    def merge(self, other: VerbReservoir) -> None:
        """Add a reservoir of other occurrences of the same verb (another shard)."""
        self.count += other.count
        self.digest = (self.digest + other.digest) % _DIGEST_MODULUS
        for held in other._heap:
            self._keep(held)

    @property
    def held(self) -> int:
        """Occurrences held (never more than ``cap``)."""
        return len(self._heap)

    def sample(self) -> list[Occurrence]:
        """The sampled occurrences, by increasing priority (an order that no reading order or
        sharding changes)."""
        return [held.occurrence for held in sorted(self._heap, key=lambda h: h.priority)]


@dataclass
class CorpusSample:
    """One reservoir per verb lemma (see the module docstring)."""

    cap: int
    random_state: int
    verbs: dict[str, VerbReservoir] = field(default_factory=dict)

    def add(self, occurrence: Occurrence, input_key: str = "") -> None:
        reservoir = self.verbs.get(occurrence.lemma)
        if reservoir is None:
            reservoir = self.verbs[occurrence.lemma] = VerbReservoir(self.cap)
        reservoir.offer(
            occurrence,
            occurrence_priority(self.random_state, occurrence),
            _digest(occurrence, input_key),
        )

    def merge(self, other: CorpusSample) -> CorpusSample:
        for lemma, reservoir in other.verbs.items():
            mine = self.verbs.get(lemma)
            if mine is None:
                self.verbs[lemma] = mine = VerbReservoir(self.cap)
            mine.merge(reservoir)
        return self

    @property
    def counts(self) -> dict[str, int]:
        return {lemma: reservoir.count for lemma, reservoir in self.verbs.items()}

    def iter_samples(self) -> Iterator[tuple[str, list[Occurrence]]]:
        for lemma in sorted(self.verbs):
            yield lemma, self.verbs[lemma].sample()


def sample_corpus(
    occurrences: Iterable[Occurrence],
    cap: int,
    random_state: int,
    *,
    input_key: Callable[[Occurrence], str] | None = None,
) -> CorpusSample:
    """Stream ``occurrences`` into one reservoir per verb (memory: ``cap`` per verb)."""
    sample = CorpusSample(cap, random_state)
    for occurrence in occurrences:
        sample.add(occurrence, input_key(occurrence) if input_key is not None else "")
    return sample

"""Corpus passes run shard by shard on an executor: frame counts.

Obliques are admitted as in one process (``lexbuild.corpus.argumenthood``): with
``obliques="evidence"`` a first pass counts every shard's obliques on the workers
(``ObliqueCounts`` add up in shard order), the client decides, and the decision travels with the
second pass; ``obliques="labels"`` trusts the treebank's labels in one pass.

``count_frames_sharded``: each shard's frame patterns are counted where it is read and the
counts are added up in shard order, so the table is the one ``count_frames`` gives in one
process. Induction reads shards with ``CorpusPass`` too (``lexbuild.senses.corpus_induction``).
"""

from __future__ import annotations

import unicodedata
from collections import Counter
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path

from lexbuild.corpus.argumenthood import Decision, ObliqueCounts, apply
from lexbuild.corpus.occurrences import Occurrence, extract_occurrences, profile_for
from lexbuild.corpus.shards import SHARD_BYTES, Shard, iter_shard_sentences, plan_shards
from lexbuild.corpus.valency import FrameCount, FrameThresholds, select_frames
from lexbuild.errors import CorpusError
from lexbuild.lexicon.model import Slot, format_frame
from lexbuild.senses.executor import Executor

__all__ = [
    "CorpusPass",
    "ShardCounts",
    "count_frames_sharded",
]


@dataclass(frozen=True)
class CorpusPass:
    """What a pass over one shard reads: the shard and the reading options."""

    shard: Shard
    language: str = "fr"
    lemmas: frozenset[str] | None = None
    on_error: str = "raise"
    include_auxiliaries: bool = False
    index: int = 0  # the shard's position in reading order
    decision: Decision | None = None  # obliques admitted by the corpus-level decision

    def occurrences(self, errors: list[CorpusError]) -> Iterator[Occurrence]:
        stream = self._extracted(errors)
        if self.decision is None:
            return stream
        return apply(stream, self.decision, profile_for(self.language))

    def _extracted(self, errors: list[CorpusError]) -> Iterator[Occurrence]:
        profile = profile_for(self.language)
        wanted = self.lemmas
        sentences = iter_shard_sentences(
            self.shard, on_error="skip" if self.on_error == "skip" else "raise", errors=errors
        )
        # The loop of ``iter_occurrences`` over one shard's sentences.
        for sentence in sentences:
            if wanted is not None and not any(
                unicodedata.normalize("NFC", t.lemma) in wanted for t in sentence.tokens
            ):
                continue
            for occurrence in extract_occurrences(
                sentence, profile, include_auxiliaries=self.include_auxiliaries
            ):
                if wanted is None or occurrence.lemma in wanted:
                    yield occurrence


@dataclass
class ShardCounts:
    """Frame pattern counts, occurrences and adjuncts per lemma of one shard."""

    patterns: dict[str, Counter[tuple[Slot, ...]]] = field(default_factory=dict)
    stats: dict[str, list[int]] = field(default_factory=dict)
    errors: list[str] = field(default_factory=list)  # skipped sentences (--on-error skip)
    failure: str | None = None  # the error that stopped the shard (--on-error raise)


def count_shard(job: CorpusPass) -> ShardCounts:
    """Count one shard (a worker task: errors are returned as text, raised by the client)."""
    counts = ShardCounts()
    errors: list[CorpusError] = []
    try:
        for occurrence in job.occurrences(errors):
            counter = counts.patterns.get(occurrence.lemma)
            if counter is None:
                counter = counts.patterns[occurrence.lemma] = Counter()
                counts.stats[occurrence.lemma] = [0, 0]
            counter[occurrence.slots] += 1
            stat = counts.stats[occurrence.lemma]
            stat[0] += 1
            stat[1] += occurrence.adjuncts
    except CorpusError as error:
        counts.failure = str(error)
    counts.errors = [str(error) for error in errors]
    return counts


def count_oblique_shard(job: CorpusPass) -> ObliqueCounts:
    """The first pass over one shard (every verb, labels alone): its oblique counts.

    A malformed sentence is left to the second pass, which reports it as one process would.
    """
    try:
        return ObliqueCounts().update(job.occurrences([]))
    except CorpusError:
        return ObliqueCounts()


def decide_obliques_sharded(
    jobs: Sequence[CorpusPass], executor: Executor
) -> Decision:
    """The argument/adjunct decision of the whole corpus, counted shard by shard."""
    every_verb = [replace(job, lemmas=None, decision=None) for job in jobs]
    total = ObliqueCounts()
    for counts in executor.map(count_oblique_shard, every_verb):
        total = total + counts
    return total.decide()


def _jobs(
    paths: Iterable[str | Path],
    executor: Executor,
    *,
    language: str,
    lemmas: Iterable[str] | None,
    on_error: str,
    include_auxiliaries: bool,
    obliques: str = "evidence",
    shard_bytes: int | None = None,
    on_decision: Callable[[Decision], None] | None = None,
) -> list[CorpusPass]:
    shards = plan_shards(paths, shard_bytes=shard_bytes or SHARD_BYTES)
    wanted = None if lemmas is None else frozenset(unicodedata.normalize("NFC", x) for x in lemmas)
    jobs = [
        CorpusPass(shard, language, wanted, on_error, include_auxiliaries, index)
        for index, shard in enumerate(shards)
    ]
    if obliques != "evidence":
        return jobs
    decision = decide_obliques_sharded(jobs, executor)
    if on_decision is not None:
        on_decision(decision)
    return [replace(job, decision=decision) for job in jobs]


def count_frames_sharded(
    paths: Iterable[str | Path],
    executor: Executor,
    thresholds: FrameThresholds | None = None,
    *,
    language: str = "fr",
    lemmas: Iterable[str] | None = None,
    on_error: str = "raise",
    include_auxiliaries: bool = False,
    obliques: str = "evidence",
    shard_bytes: int | None = None,
    on_shard: Callable[[int], None] | None = None,
    on_decision: Callable[[Decision], None] | None = None,
) -> tuple[dict[str, list[FrameCount]], dict[str, list[int]], list[str]]:
    """The frame table, the per-lemma [occurrences, adjuncts] and the skipped sentences.

    The same table as ``count_frames`` over ``iter_occurrences`` in one process; the first
    malformed sentence in reading order raises ``CorpusError`` (``on_error="raise"``).
    ``on_decision`` receives the argument/adjunct decision of the first pass (``obliques=
    "evidence"``): the one ``count_obliques(...).decide()`` gives in one process, its
    evidence counted shard by shard and added up (what ``frames --explain`` shows).
    """
    thresholds = thresholds or FrameThresholds()
    jobs = _jobs(
        paths, executor, language=language, lemmas=lemmas, on_error=on_error,
        include_auxiliaries=include_auxiliaries, obliques=obliques, shard_bytes=shard_bytes,
        on_decision=on_decision,
    )
    patterns: dict[str, Counter[tuple[Slot, ...]]] = {}
    stats: dict[str, list[int]] = {}
    errors: list[str] = []
    for counts in executor.map(count_shard, jobs):
        if counts.failure is not None:
            raise CorpusError(counts.failure)
        for lemma, counter in counts.patterns.items():
            patterns.setdefault(lemma, Counter()).update(counter)
            total = stats.setdefault(lemma, [0, 0])
            total[0] += counts.stats[lemma][0]
            total[1] += counts.stats[lemma][1]
        errors.extend(counts.errors)
        if on_shard is not None:
            on_shard(1)
    table: dict[str, list[FrameCount]] = {}
    for lemma in sorted(patterns):
        selected, total_count = select_frames(patterns[lemma], thresholds)
        table[lemma] = [
            FrameCount(lemma, format_frame(slots), frequency, frequency / total_count)
            for slots, frequency, _ in selected
        ]
    return table, stats, errors

"""Sense induction on an executor (a Dask cluster), without the corpus in memory.

1. The corpus is read shard by shard on the workers; each shard spills its verbs' occurrences
   to one file per verb (``lexbuild.corpus.sharded.spill_by_verb``).
2. The threshold is chosen as in one process (a calibration on the corpus streams the spilled
   occurrences back in corpus order; a given threshold or calibration file reads nothing).
3. One task per verb, on the workers: read that verb's occurrences, encode them in batches
   through the vector cache, cluster them (``induce_verb``). The largest verbs are submitted
   first (the longest tasks must not start last); results are put back in lemma order.

The result is the ``InductionResult`` ``SenseInducer.fit`` gives in one process, byte for byte
once written. The vector cache stays safe with many workers: each worker thread writes its
new vectors to a shard of its own (``vector_shards/``) and reads the main file, which nobody
writes meanwhile; the shards are merged into the main file by the client after the run (and
before it, should an earlier run have stopped half way), so a rerun computes nothing. Shards
rather than one file in SQLite's WAL mode: as fast (``benchmarks/bench_cache_writers.py``: 2
writers x 20,000 vectors, 14.4 s with the merge vs 14.8 s), and WAL needs shared memory between
the writers, which a cache folder on a network file system shared by machines does not give
(SQLite's documentation of WAL says it does not work over a network file system).
"""

from __future__ import annotations

import dataclasses
import shutil
import tempfile
import unicodedata
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.corpus.sharded import (
    SpilledVerbs,
    iter_spilled_in_corpus_order,
    read_spilled,
    spill_by_verb,
)
from lexbuild.errors import InductionError
from lexbuild.senses.calibrate import Calibration
from lexbuild.senses.executor import Executor
from lexbuild.senses.induce import VerbResult, VerbTask, induce_verb
from lexbuild.senses.inducer import InductionResult, _run_id, assemble_result
from lexbuild.senses.settings import InductionSettings
from lexbuild.senses.threshold import ThresholdChoice, choose_threshold
from lexbuild.senses.vectors import (
    CacheStats,
    Representation,
    VectorCache,
    WorkerVectorCache,
    encode_cached,
    merge_vector_shards,
)

__all__ = ["induce_on_executor"]

# ------------------------------------------------------------------------------ verb tasks


@dataclass(frozen=True)
class SpilledVerbTask:
    """One verb to induce on a worker: where its occurrences are, how to encode them."""

    lemma: str
    spill: str
    shards: tuple[int, ...]
    representation: Representation
    cache: str | None
    settings: InductionSettings
    run: str
    guide: Any = None


def induce_spilled_verb(task: SpilledVerbTask) -> tuple[VerbResult, CacheStats]:
    """Read, encode (batches, through the cache) and cluster one verb (a worker task)."""
    occurrences = read_spilled(task.spill, task.lemma, task.shards)
    stats = CacheStats()
    cache = WorkerVectorCache(task.cache) if task.cache is not None else None
    try:
        vectors = encode_cached(
            task.representation, occurrences, cache, stats=stats  # type: ignore[arg-type]
        )
    finally:
        if cache is not None:
            cache.close()
    result = induce_verb(
        VerbTask(
            lemma=task.lemma,
            occurrences=occurrences,
            vectors=vectors,
            settings=task.settings,
            representation=task.representation.id,
            model=task.representation.model,
            run=task.run,
            guide=task.guide,
        )
    )
    return result, stats


def _portable(representation: Representation) -> Representation:
    # A fresh copy without what this process loaded (vector tables, models): workers load
    # their own once per process.
    if dataclasses.is_dataclass(representation) and not isinstance(representation, type):
        return dataclasses.replace(representation)
    return representation


class _SpilledMapping(Mapping[str, Sequence[Occurrence]]):
    """lemma -> its occurrences, read from the spill when asked (one verb in memory)."""

    def __init__(self, spilled: SpilledVerbs, lemmas: Sequence[str]) -> None:
        self.spilled = spilled
        self.lemmas = list(lemmas)

    def __getitem__(self, lemma: str) -> Sequence[Occurrence]:
        return read_spilled(self.spilled.folder, lemma, self.spilled.shards_of[lemma])

    def __iter__(self) -> Iterator[str]:
        return iter(self.lemmas)

    def __len__(self) -> int:
        return len(self.lemmas)


def induce_on_executor(
    corpus: Sequence[str | Path],
    representation: Representation,
    executor: Executor,
    settings: InductionSettings | None = None,
    *,
    calibration: str | Path | Calibration | None = None,
    cache: str | Path | None = None,
    lemmas: Iterable[str] | None = None,
    language: str = "fr",
    spill: str | Path | None = None,
    guide: Mapping[str, Any] | None = None,
    on_shard: Callable[[int], None] | None = None,
    on_calibrated: Callable[[int], None] | None = None,
    on_verb: Callable[[str, int], None] | None = None,
    on_stage: Callable[[str], None] | None = None,
) -> tuple[InductionResult, ThresholdChoice]:
    """``SenseInducer(...).fit(iter_occurrences(corpus))`` run on ``executor`` (module doc).

    ``cache``: the vector cache folder (None: no cache); ``spill``: a folder every worker can
    reach for the per-verb partitions (default: a temporary folder, removed afterwards).
    ``on_stage(name)`` is called as each stage starts: "reading", "calibrating", "clustering"
    (a progress display switches bars there).
    """
    def stage(name: str) -> None:
        if on_stage is not None:
            on_stage(name)

    settings = settings or InductionSettings()
    wanted = None if lemmas is None else frozenset(unicodedata.normalize("NFC", x) for x in lemmas)
    calibrates = settings.calibrates and calibration is None
    if cache is not None:
        merge_vector_shards(cache)  # what an interrupted run left
    own_spill = spill is None
    folder = Path(tempfile.mkdtemp(prefix="lexbuild-spill-") if spill is None else spill)
    try:
        stage("reading")
        spilled = spill_by_verb(
            corpus,
            executor,
            folder,
            language=language,
            lemmas=None if calibrates else wanted,
            on_shard=on_shard,
        )
        selected = sorted(
            lemma for lemma in spilled.counts if wanted is None or lemma in wanted
        )
        kept = [lemma for lemma in selected if spilled.counts[lemma] >= settings.min_occurrences]
        if not kept:
            raise InductionError(
                "no verb to induce: the corpus has no occurrence"
                + (f" of {', '.join(sorted(wanted))}" if wanted else "")
                + (
                    f" seen {settings.min_occurrences}+ times"
                    if settings.min_occurrences > 1
                    else ""
                )
            )
        stats = CacheStats()
        stage("calibrating")
        driver_cache = VectorCache(cache) if cache is not None and calibrates else None
        try:
            choice = choose_threshold(
                list(iter_spilled_in_corpus_order(spilled)) if calibrates else [],
                representation,
                settings,
                calibration,
                cache=driver_cache,
                stats=stats,
                progress=on_calibrated,
                executor=executor,  # pseudo-verbs encoded and swept on the workers
            )
        finally:
            if driver_cache is not None:
                driver_cache.close()
        resolved = settings.with_threshold(choice.value)
        run = _run_id(representation, resolved, _SpilledMapping(spilled, kept))
        portable = _portable(representation)
        tasks = (
            SpilledVerbTask(
                lemma=lemma,
                spill=str(folder),
                shards=tuple(spilled.shards_of[lemma]),
                representation=portable,
                cache=None if cache is None else str(cache),
                settings=resolved,
                run=run,
                guide=None if guide is None else guide.get(lemma),
            )
            # Largest verbs first, so that none of them starts last and keeps one worker busy
            # alone at the end; results are put back in lemma order below.
            for lemma in sorted(kept, key=lambda lemma: (-spilled.counts[lemma], lemma))
        )
        by_lemma: dict[str, VerbResult] = {}
        stage("clustering")
        for result, verb_stats in executor.map(induce_spilled_verb, tasks):
            by_lemma[result.entry.lemma] = result
            stats.hits += verb_stats.hits
            stats.computed += verb_stats.computed
            if on_verb is not None:
                on_verb(result.entry.lemma, len(result.assignments))
    finally:
        if own_spill:
            shutil.rmtree(folder, ignore_errors=True)
        if cache is not None:
            merge_vector_shards(cache)
    induced = assemble_result(
        [by_lemma[lemma] for lemma in kept],
        settings=resolved,
        representation=representation,
        run=run,
        corpus=corpus,
        occurrences={lemma: spilled.counts[lemma] for lemma in kept},
        skipped_verbs=len(selected) - len(kept),
        stats=stats,
        threshold_source=choice.source,
    )
    return induced, choice

"""Sense induction over a corpus in memory constant in its size, on any executor.

The corpus comes as partitions (shards of CoNLL-U files read where they are, or lists of
occurrences already in memory); the same three passes run in one process
(``InProcessExecutor``) or on a Dask cluster, with byte-identical results:

1. **Sampling** (one task per partition): each verb's occurrences stream into a reservoir of
   ``cap`` (``lexbuild.senses.reservoir``: fixed priorities, so the sample is the one every
   sharding gives); the reservoirs of the partitions merge on the client. Nothing else is
   kept: counts and an order-free digest for the run id.
2. **Clustering** (one task per verb, largest first): the sample is encoded through the vector
   cache and clustered (``induce.fit_verb``); the threshold was chosen before, a calibration on
   the corpus using the samples (at most ``cap`` per verb).
3. **Assigning** (one task per partition): the corpus is read again; a sampled occurrence keeps
   its cluster, any other is encoded in batches with the others of its verb and goes to the
   nearest centroid. Each partition writes its assignments to one spool file per verb (corpus
   order) and returns its ``LabelTally`` per verb (members and slot patterns per cluster).

The client then finishes each verb in lemma order (``induce.finish_verb``) and the result's
assignments are read back from the spool, verb after verb, when the folder is written. Memory:
the client and each task hold at most ``cap`` occurrences per verb, one batch of vectors per
verb and the tallies (clusters x slot patterns), never the corpus; the spool holds the
assignments on disk.
"""

from __future__ import annotations

import csv
import dataclasses
import hashlib
import json
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import IO, Any

import numpy as np

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.errors import CorpusError, InductionError
from lexbuild.senses.calibrate import Calibration
from lexbuild.senses.executor import Executor
from lexbuild.senses.induce import (
    Assignment,
    LabelTally,
    VerbAssigner,
    VerbModel,
    VerbResult,
    VerbTask,
    assign_vectors,
    finish_verb,
    fit_verb,
)
from lexbuild.senses.reservoir import CorpusSample, occurrence_ref, sample_corpus
from lexbuild.senses.settings import InductionSettings
from lexbuild.senses.threshold import ThresholdChoice, choose_threshold
from lexbuild.senses.vectors import (
    CacheStats,
    Representation,
    VectorCache,
    WorkerVectorCache,
    encode_cached,
    fingerprint,
)

__all__ = [
    "CorpusInduction",
    "SpooledAssignments",
    "induce_partitions",
    "partition_occurrences",
]

#: Occurrences of one verb beyond the sample encoded together in the assigning pass.
ASSIGN_BATCH = 256
#: Spool files a partition task keeps open at once (well under the usual limit of 1024).
_OPEN_FILES = 256

Cache = VectorCache | str | None  # an open cache (one process) or its folder (workers)


def partition_occurrences(partition: Any, errors: list[CorpusError]) -> Iterator[Occurrence]:
    """The occurrences of a partition: a shard job (``corpus.sharded.CorpusPass``) or a
    sequence of occurrences already in memory."""
    if hasattr(partition, "occurrences"):
        return iter(partition.occurrences(errors))
    return iter(partition)


def _narrowed(partition: Any, lemmas: frozenset[str] | None) -> Any:
    """A shard job that skips the sentences without a wanted verb (extraction is the cost),
    carrying only those verbs' oblique verdicts (the whole corpus's decision is far larger
    than a task and would travel with every shard)."""
    if lemmas is None or not dataclasses.is_dataclass(partition) or not hasattr(
        partition, "lemmas"
    ):
        return partition
    changes: dict[str, Any] = {"lemmas": lemmas}
    decision = getattr(partition, "decision", None)
    if decision is not None:
        changes["decision"] = _decision_for(decision, lemmas)
    return dataclasses.replace(partition, **changes)  # type: ignore[type-var]


_NARROWED_DECISIONS: dict[tuple[int, frozenset[str]], Any] = {}


def _decision_for(decision: Any, lemmas: frozenset[str]) -> Any:
    """The decision restricted to ``lemmas`` (one object shared by every shard job)."""
    key = (id(decision), lemmas)
    cached = _NARROWED_DECISIONS.get(key)
    if cached is None or cached[0] is not decision:
        verdicts = {k: v for k, v in decision.verdicts.items() if k[0] in lemmas}
        _NARROWED_DECISIONS.clear()  # one run's decision at a time
        cached = _NARROWED_DECISIONS[key] = (decision, dataclasses.replace(decision,
                                                                           verdicts=verdicts))
    return cached[1]


def _open_cache(cache: Cache) -> Any:
    return WorkerVectorCache(cache) if isinstance(cache, str) else cache


def _close_cache(cache: Cache, opened: Any) -> None:
    if isinstance(cache, str) and opened is not None:
        opened.close()


# ------------------------------------------------------------------------- 1. sampling


@dataclass(frozen=True)
class SampleTask:
    partition: Any
    lemmas: frozenset[str] | None
    cap: int
    random_state: int
    representation: Representation


@dataclass
class PartitionSample:
    sample: CorpusSample
    errors: list[str] = field(default_factory=list)
    failure: str | None = None  # the error that stopped the partition (raised by the client)


def sample_partition(task: SampleTask) -> PartitionSample:
    """Read one partition into per-verb reservoirs (a worker task)."""
    errors: list[CorpusError] = []
    wanted = task.lemmas
    stream = (
        occ for occ in partition_occurrences(task.partition, errors)
        if wanted is None or occ.lemma in wanted
    )
    failure = None
    sample = CorpusSample(task.cap, task.random_state)
    try:
        sample = sample_corpus(
            stream, task.cap, task.random_state, input_key=task.representation.input_key
        )
    except CorpusError as error:
        failure = str(error)
    return PartitionSample(sample, [str(e) for e in errors], failure)


# ----------------------------------------------------------------------- 2. clustering


@dataclass(frozen=True)
class FitTask:
    task: VerbTask  # vectors empty: encoded on the worker
    representation: Representation
    cache: Cache
    curated: tuple[Any, ...] = ()  # the verb's curated senses (guided induction)
    taken: frozenset[str] = frozenset()


def fit_sampled_verb(job: FitTask) -> tuple[VerbModel, CacheStats]:
    """Encode one verb's sample (through the cache) and cluster it (a worker task)."""
    stats = CacheStats()
    cache = _open_cache(job.cache)
    try:
        vectors = encode_cached(job.representation, job.task.occurrences, cache, stats=stats)
        guide = None
        if job.curated:
            from lexbuild.senses.guide import prepare_verb_guide

            settings = job.task.settings
            guide = prepare_verb_guide(
                job.curated, job.task.occurrences, vectors, job.representation,
                taken=job.taken, method=settings.guide_assigner,
                max_distance=settings.guide_max_distance, cache=cache, stats=stats,
            )
    finally:
        _close_cache(job.cache, cache)
    task = VerbTask(
        lemma=job.task.lemma, occurrences=job.task.occurrences, vectors=vectors,
        settings=job.task.settings, representation=job.task.representation,
        model=job.task.model, run=job.task.run, guide=guide,
    )
    return fit_verb(task), stats


# ------------------------------------------------------------------------ 3. assigning


def _spool_file(folder: str | Path, index: int, lemma: str) -> Path:
    # A digest, not the lemma: a lemma may hold characters a file name cannot.
    digest = hashlib.sha256(lemma.encode()).hexdigest()[:24]
    return Path(folder) / f"{index:06d}" / f"{digest}.tsv"


@dataclass(frozen=True)
class AssignTask:
    partition: Any
    index: int  # the partition's position in reading order
    assigners: Mapping[str, VerbAssigner]
    representation: Representation
    cache: Cache
    spool: str
    batch: int = ASSIGN_BATCH


@dataclass
class PartitionTally:
    tallies: dict[str, LabelTally] = field(default_factory=dict)
    stats: CacheStats = field(default_factory=CacheStats)
    lemmas: list[str] = field(default_factory=list)  # verbs with a spool file here
    failure: str | None = None


class _VerbSpool:
    """One verb's pending rows in a partition: labelled in batches, written in corpus order."""

    def __init__(self, lemma: str) -> None:
        self.lemma = lemma
        self.rows: list[tuple[Occurrence, int | None]] = []
        self.unlabelled = 0


def assign_partition(task: AssignTask) -> PartitionTally:
    """Label every occurrence of the induced verbs in one partition (a worker task)."""
    out = PartitionTally()
    cache = _open_cache(task.cache)
    handles: dict[str, IO[str]] = {}
    folder = Path(task.spool) / f"{task.index:06d}"
    folder.mkdir(parents=True, exist_ok=True)
    pending: dict[str, _VerbSpool] = {}

    def flush(spool: _VerbSpool) -> None:
        assigner = task.assigners[spool.lemma]
        rest = [occ for occ, label in spool.rows if label is None]
        labels: Iterator[int] = iter(())
        if rest:
            vectors = encode_cached(task.representation, rest, cache, stats=out.stats)
            labels = iter(assign_vectors(assigner, vectors).tolist())
        handle = handles.get(spool.lemma)
        if handle is None:
            if len(handles) >= _OPEN_FILES:
                for other in handles.values():
                    other.close()
                handles.clear()
            first = spool.lemma not in out.tallies
            path = _spool_file(task.spool, task.index, spool.lemma)
            handle = handles[spool.lemma] = path.open(
                "w" if first else "a", encoding="utf-8", newline=""
            )
            if first:
                out.tallies[spool.lemma] = LabelTally()
                out.lemmas.append(spool.lemma)
        tally = out.tallies[spool.lemma]
        writer = csv.writer(handle, delimiter="\t", lineterminator="\n")
        for occ, label in spool.rows:
            label = next(labels) if label is None else label
            tally.add(label, occ.slots)
            corpus, sentence, token = occurrence_ref(occ)
            writer.writerow((label, corpus, sentence, token + 1))
        spool.rows.clear()
        spool.unlabelled = 0

    errors: list[CorpusError] = []
    try:
        for occ in partition_occurrences(task.partition, errors):
            assigner = task.assigners.get(occ.lemma)
            if assigner is None:
                continue
            spool = pending.get(occ.lemma)
            if spool is None:
                spool = pending[occ.lemma] = _VerbSpool(occ.lemma)
            label = assigner.labels.get(occurrence_ref(occ))
            spool.rows.append((occ, label))
            if label is None:
                spool.unlabelled += 1
                if spool.unlabelled >= task.batch:
                    flush(spool)
        for lemma in sorted(pending):
            if pending[lemma].rows:
                flush(pending[lemma])
    except CorpusError as error:
        out.failure = str(error)
    finally:
        for handle in handles.values():
            handle.close()
        _close_cache(task.cache, cache)
    return out


class SpooledAssignments:
    """The assignments of a run, read from the spool verb after verb (lemma order), each
    verb's in corpus order. Iterable more than once while the spool exists."""

    def __init__(
        self,
        spool: str | Path,
        files: Sequence[tuple[str, Sequence[int]]],
        senses: Mapping[str, Mapping[int, str]],
    ) -> None:
        self.spool = Path(spool)
        self.files = files  # lemma -> partitions holding it, in reading order
        self.senses = senses  # lemma -> cluster label -> sense id

    def __iter__(self) -> Iterator[Assignment]:
        for lemma, partitions in self.files:
            sense_of = self.senses[lemma]
            for index in partitions:
                path = _spool_file(self.spool, index, lemma)
                with path.open(encoding="utf-8", newline="") as handle:
                    for label, corpus, sentence, token in csv.reader(handle, delimiter="\t"):
                        yield Assignment(lemma, sense_of[int(label)], corpus, sentence, int(token))


# ------------------------------------------------------------------------------ the run


@dataclass
class CorpusInduction:
    """What ``induce_partitions`` returns to ``SenseInducer`` and the CLI."""

    results: list[VerbResult]  # in lemma order
    assignments: SpooledAssignments
    counts: dict[str, int]  # occurrences per induced verb (all, not only the sample)
    selected: int  # verbs asked for and seen, before min_occurrences
    run: str
    settings: InductionSettings  # threshold resolved
    choice: ThresholdChoice
    stats: CacheStats
    errors: list[str] = field(default_factory=list)


def run_id(
    representation: Representation, settings: InductionSettings, sample: CorpusSample,
    lemmas: Iterable[str],
) -> str:
    """A content hash of everything the result depends on (never the time): the
    representation, the settings and, per verb, its occurrences (count and order-free digest
    of every one, so it needs no occurrence kept)."""
    h = hashlib.sha256()
    h.update(fingerprint(representation).encode())
    h.update(json.dumps(settings.to_json(), sort_keys=True).encode())
    for lemma in sorted(lemmas):
        reservoir = sample.verbs[lemma]
        h.update(f"{lemma}\x1d{reservoir.count}\x1d{reservoir.digest:032x}\x1d".encode())
    return "run-" + h.hexdigest()[:16]


def _merge_samples(
    executor: Executor, tasks: Iterable[SampleTask], cap: int, random_state: int,
    on_partition: Callable[[int], None] | None,
) -> tuple[CorpusSample, list[str], int]:
    merged = CorpusSample(cap, random_state)
    errors: list[str] = []
    partitions = 0
    for part in executor.map(sample_partition, tasks):
        if part.failure is not None:
            raise CorpusError(part.failure)
        merged.merge(part.sample)
        errors.extend(part.errors)
        partitions += 1
        if on_partition is not None:
            on_partition(1)
    return merged, errors, partitions


def induce_partitions(
    partitions: Sequence[Any],
    representation: Representation,
    executor: Executor,
    settings: InductionSettings,
    spool: str | Path,
    *,
    calibration: str | Path | Calibration | None = None,
    cache: Cache = None,
    worker_cache: Cache = None,
    lemmas: frozenset[str] | None = None,
    guide: Mapping[str, Any] | None = None,
    portable: Representation | None = None,
    calibrate_on_executor: bool = False,
    on_stage: Callable[[str], None] | None = None,
    on_partition: Callable[[int], None] | None = None,
    on_calibrated: Callable[[int], None] | None = None,
    on_verb: Callable[[str, int], None] | None = None,
) -> CorpusInduction:
    """The three passes of the module docstring over ``partitions`` (in reading order).

    ``cache``: the vector cache this process uses (calibration); ``worker_cache``: what tasks
    get (the same open cache in one process, the cache folder on workers); ``portable``: the
    representation sent to tasks (default ``representation``); ``calibrate_on_executor``:
    pseudo-verbs of a calibration encoded and swept on the executor too. ``spool``: an empty
    folder every task can reach, kept by the caller until the assignments have been read.
    """
    def stage(name: str) -> None:
        if on_stage is not None:
            on_stage(name)

    task_representation = portable or representation
    calibrates = settings.calibrates and calibration is None
    reading = None if calibrates else lemmas  # a calibration on the corpus reads every verb
    stage("reading")
    sample, errors, _ = _merge_samples(
        executor,
        (
            SampleTask(_narrowed(partition, reading), reading, settings.cap,
                       settings.random_state, task_representation)
            for partition in partitions
        ),
        settings.cap, settings.random_state, on_partition,
    )
    counts = sample.counts
    selected = sorted(lemma for lemma in counts if lemmas is None or lemma in lemmas)
    kept = [lemma for lemma in selected if counts[lemma] >= settings.min_occurrences]
    if not kept:
        raise InductionError(
            "no verb to induce: the corpus has no occurrence"
            + (f" of {', '.join(sorted(lemmas))}" if lemmas else "")
            + (
                f" seen {settings.min_occurrences}+ times"
                if settings.min_occurrences > 1
                else ""
            )
        )
    if guide is not None and not isinstance(guide, Mapping):
        raise InductionError("guide must map each lemma to its curated senses")
    stats = CacheStats()
    stage("calibrating")
    # A calibration on the corpus sees each verb's sample (at most cap occurrences) and its
    # frequency in the whole corpus.
    choice = choose_threshold(
        [occ for _, occs in sample.iter_samples() for occ in occs] if calibrates else [],
        representation,
        settings,
        calibration,
        cache=cache if isinstance(cache, VectorCache) else None,
        stats=stats,
        progress=on_calibrated,
        executor=executor if calibrate_on_executor else None,
        counts=sample.counts if calibrates else None,
    )
    resolved = settings.with_threshold(choice.value)
    run = run_id(representation, resolved, sample, kept)
    for lemma in set(sample.verbs) - set(kept):
        del sample.verbs[lemma]  # verbs read for calibration only
    taken = frozenset(getattr(guide, "taken", ()))

    def fit_jobs() -> Iterator[FitTask]:
        # Largest verbs first, so that none of them starts last and keeps one worker busy alone
        # at the end; each sample leaves the client as its task is made.
        for lemma in sorted(kept, key=lambda lemma: (-counts[lemma], lemma)):
            occurrences = sample.verbs.pop(lemma).sample()
            yield FitTask(
                task=VerbTask(
                    lemma=lemma, occurrences=occurrences,
                    vectors=np.zeros((0, 0), dtype=np.float32), settings=resolved,
                    representation=representation.id, model=representation.model, run=run,
                ),
                representation=task_representation,
                cache=worker_cache,
                curated=tuple((guide or {}).get(lemma) or ()),
                taken=taken,
            )

    stage("clustering")
    models: dict[str, VerbModel] = {}
    for model, verb_stats in executor.map(fit_sampled_verb, fit_jobs()):
        models[model.lemma] = model
        stats.hits += verb_stats.hits
        stats.computed += verb_stats.computed
        if on_verb is not None:
            on_verb(model.lemma, counts[model.lemma])
    stage("assigning")
    assigners = {lemma: models[lemma].assigner for lemma in kept}
    tallies = {lemma: LabelTally() for lemma in kept}
    holding: dict[str, list[int]] = {lemma: [] for lemma in kept}
    jobs = (
        AssignTask(_narrowed(partition, frozenset(kept)), index, assigners,
                   task_representation, worker_cache, str(spool))
        for index, partition in enumerate(partitions)
    )
    for index, part in enumerate(executor.map(assign_partition, jobs)):
        if part.failure is not None:
            raise CorpusError(part.failure)
        for lemma, tally in part.tallies.items():
            tallies[lemma].merge(tally)
        for lemma in part.lemmas:
            holding[lemma].append(index)
        stats.hits += part.stats.hits
        stats.computed += part.stats.computed
        if on_partition is not None:
            on_partition(1)
    results = []
    for lemma in kept:
        results.append(
            finish_verb(
                models.pop(lemma),
                tallies.pop(lemma),
                VerbTask(
                    lemma=lemma, occurrences=(), vectors=np.zeros((0, 0), dtype=np.float32),
                    settings=resolved, representation=representation.id,
                    model=representation.model, run=run,
                ),
            )
        )
    assignments = SpooledAssignments(
        spool,
        [(lemma, holding[lemma]) for lemma in kept],
        {result.entry.lemma: result.sense_of_label for result in results},
    )
    return CorpusInduction(
        results=results,
        assignments=assignments,
        counts={lemma: counts[lemma] for lemma in kept},
        selected=len(selected),
        run=run,
        settings=resolved,
        choice=choice,
        stats=stats,
        errors=errors,
    )


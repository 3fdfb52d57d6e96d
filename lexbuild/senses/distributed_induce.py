"""Sense induction on an executor (a Dask cluster), in memory constant in corpus size.

The corpus is cut into shards (``lexbuild.corpus.shards``) read on the workers, and the three
passes of ``lexbuild.senses.corpus_induction`` run over them: sampling (each verb's ``cap``
occurrences of smallest fixed priority, merged on the client), clustering (one task per verb,
largest first, results in lemma order), assigning (each shard read again, the rest of each verb
labelled by its nearest centroid, assignments spooled to a folder every worker reaches). The
single-process CLI runs the same passes over the same shards in this process, so the induction
folders are byte-identical. No task holds more than ``cap`` occurrences of a verb, so worker
memory does not grow with a verb's frequency (``benchmarks/bench_distributed.py induce``).

The vector cache stays safe with many workers: each worker thread writes its new vectors to a
shard of its own (``vector_shards/``) and reads the main file, which nobody writes meanwhile;
the shards are merged into the main file by the client after the run (and before it, should an
earlier run have stopped half way), so a rerun computes nothing. Shards rather than one file in
SQLite's WAL mode: as fast (``benchmarks/bench_cache_writers.py``: 2 writers x 20,000 vectors,
14.4 s with the merge vs 14.8 s), and WAL needs shared memory between the writers, which a
cache folder on a network file system shared by machines does not give (SQLite's documentation
of WAL says it does not work over a network file system).
"""

from __future__ import annotations

import dataclasses
import shutil
import tempfile
import unicodedata
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any, TypedDict, Unpack

from lexbuild.corpus.sharded import CorpusPass, decide_obliques_sharded
from lexbuild.corpus.shards import SHARD_BYTES, plan_shards
from lexbuild.senses.calibrate import Calibration
from lexbuild.senses.corpus_induction import CorpusInduction, induce_partitions
from lexbuild.senses.executor import Executor
from lexbuild.senses.inducer import InductionResult, result_of
from lexbuild.senses.settings import InductionSettings
from lexbuild.senses.threshold import ThresholdChoice
from lexbuild.senses.vectors import Representation, VectorCache, merge_vector_shards

__all__ = ["CorpusRunOptions", "corpus_partitions", "induce_corpus", "induce_on_executor"]


def corpus_partitions(
    corpus: Sequence[str | Path],
    executor: Executor,
    *,
    language: str = "fr",
    shard_bytes: int | None = None,
) -> list[CorpusPass]:
    """The shards of a corpus as induction partitions, obliques admitted by the decision of
    the whole corpus (its first pass counted shard by shard on ``executor``), as
    ``iter_occurrences`` does in one process."""
    shards = plan_shards(corpus, shard_bytes=shard_bytes or SHARD_BYTES)
    jobs = [CorpusPass(shard, language, index=index) for index, shard in enumerate(shards)]
    decision = decide_obliques_sharded(jobs, executor)
    return [replace(job, decision=decision) for job in jobs]


def _portable(representation: Representation) -> Representation:
    # A fresh copy without what this process loaded (vector tables, models): workers load
    # their own once per process.
    if dataclasses.is_dataclass(representation) and not isinstance(representation, type):
        return dataclasses.replace(representation)
    return representation


class CorpusRunOptions(TypedDict, total=False):
    """The keyword options of ``induce_corpus``, which ``induce_on_executor`` passes on."""

    calibration: str | Path | Calibration | None
    cache: str | Path | None
    lemmas: Iterable[str] | None
    language: str
    spill: str | Path | None
    guide: Mapping[str, Any] | None
    shard_bytes: int | None
    on_shard: Callable[[int], None] | None
    on_calibrated: Callable[[int], None] | None
    on_verb: Callable[[str, int], None] | None
    on_stage: Callable[[str], None] | None


def induce_corpus(
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
    shard_bytes: int | None = None,
    on_shard: Callable[[int], None] | None = None,
    on_calibrated: Callable[[int], None] | None = None,
    on_verb: Callable[[str, int], None] | None = None,
    on_stage: Callable[[str], None] | None = None,
) -> tuple[CorpusInduction, Path]:
    """The passes over a corpus's shards; returns the run and its spool folder, which holds
    the assignments until the caller removes it (``induce_on_executor`` wraps this)."""
    settings = settings or InductionSettings()
    wanted = None if lemmas is None else frozenset(unicodedata.normalize("NFC", x) for x in lemmas)
    if cache is not None:
        merge_vector_shards(cache)  # what an interrupted run left
    folder = Path(tempfile.mkdtemp(prefix="lexbuild-spool-") if spill is None else spill)
    folder.mkdir(parents=True, exist_ok=True)
    if on_stage is not None:
        on_stage("obliques")  # the argument/adjunct decision's pass over the whole corpus
    partitions = corpus_partitions(corpus, executor, language=language, shard_bytes=shard_bytes)
    calibrates = settings.calibrates and calibration is None
    driver_cache = VectorCache(cache) if cache is not None and calibrates else None
    try:
        run = induce_partitions(
            partitions, representation, executor, settings, folder,
            calibration=calibration, cache=driver_cache,
            worker_cache=None if cache is None else str(cache), lemmas=wanted, guide=guide,
            portable=_portable(representation), calibrate_on_executor=True,
            on_stage=on_stage, on_partition=on_shard, on_calibrated=on_calibrated,
            on_verb=on_verb,
        )
    except BaseException:
        if spill is None:
            shutil.rmtree(folder, ignore_errors=True)
        raise
    finally:
        if driver_cache is not None:
            driver_cache.close()
        if cache is not None:
            merge_vector_shards(cache)
    return run, folder


def induce_on_executor(
    corpus: Sequence[str | Path],
    representation: Representation,
    executor: Executor,
    settings: InductionSettings | None = None,
    **options: Unpack[CorpusRunOptions],
) -> tuple[InductionResult, ThresholdChoice]:
    """``SenseInducer(...).fit(iter_occurrences(corpus))`` run on ``executor`` (module doc),
    with the assignments read back into a list (the CLI streams them to the folder instead).

    ``options`` are ``induce_corpus``'s (``CorpusRunOptions``). ``cache``: the vector cache
    folder (None: no cache); ``spill``: a folder every worker can
    reach for the assignment spool (default: a temporary folder, removed afterwards).
    ``on_stage(name)`` is called as each stage starts: "obliques", "reading", "calibrating",
    "clustering", "assigning" (a progress display switches bars there).
    """
    run, folder = induce_corpus(corpus, representation, executor, settings, **options)
    try:
        result = result_of(
            run, representation, corpus, guide=options.get("guide"), lemmas=options.get("lemmas")
        )
        result.assignments = list(result.assignments)
    finally:
        if options.get("spill") is None:
            shutil.rmtree(folder, ignore_errors=True)
    return result, run.choice

"""``SenseInducer``: sense induction as a scikit-learn-shaped estimator.

Parameters go to ``__init__`` (the representation, then any field of ``InductionSettings`` by
name: ``threshold``, ``clusterer``, ``linkage``, ``random_state``, ``cap``, ``examples`` ...;
plus a calibration file, an executor, a vector cache and a guide); ``fit(occurrences)`` runs
the passes of ``lexbuild.senses.corpus_induction`` over them (each verb's capped sample
clustered through the executor, the rest assigned) and keeps the result as data in ``result_``
(an ``InductionResult``) and the threshold choice in ``threshold_``. Nothing is printed;
callbacks serve progress bars. ``lexbuild.senses.induction_folder`` writes the result.

    inducer = SenseInducer(load_representation("static-syntactic"), threshold=0.6)
    result = inducer.fit(occurrences).result_
"""

from __future__ import annotations

import unicodedata
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field, fields
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt

from lexbuild import __version__
from lexbuild.corpus.occurrences import Occurrence
from lexbuild.lexicon.model import Entry
from lexbuild.senses.calibrate import Calibration
from lexbuild.senses.executor import Executor, InProcessExecutor
from lexbuild.senses.induce import Assignment, VerbResult
from lexbuild.senses.settings import InductionSettings
from lexbuild.senses.threshold import ThresholdChoice
from lexbuild.senses.vectors import (
    CacheStats,
    Representation,
    VectorCache,
)

if TYPE_CHECKING:
    from lexbuild.senses.corpus_induction import CorpusInduction

__all__ = ["InductionResult", "SenseInducer", "induce", "result_of"]


@dataclass
class InductionResult:
    """What an induction run produced: entries, centroids, assignments and its provenance."""

    entries: list[Entry]
    centroids: dict[str, npt.NDArray[np.float32]]
    # A list, or (a corpus streamed by the CLI) the run's spool, read when the folder is written.
    assignments: Iterable[Assignment]
    settings: InductionSettings
    representation: str
    model: str | None
    representation_settings: dict[str, Any]
    run: str
    corpus: list[str] = field(default_factory=list)
    counts: dict[str, int] = field(default_factory=dict)
    cache: CacheStats = field(default_factory=CacheStats)
    threshold_source: str = "given"
    guided: dict[str, Any] | None = None  # curated senses used, unsupported ones (guided runs)
    # A sample of each sense's occurrence vectors (induce.OCCURRENCE_SAMPLE), for review.
    occurrence_vectors: dict[str, npt.NDArray[np.float32]] = field(default_factory=dict)

    def manifest(self) -> dict[str, Any]:
        """The content of ``induction.json``."""
        return {
            "run": self.run,
            "lexbuild_version": __version__,
            "representation": self.representation,
            "model": self.model,
            "representation_settings": self.representation_settings,
            "clusterer": self.settings.clusterer,
            "threshold": self.settings.threshold,
            "threshold_source": self.threshold_source,
            "settings": self.settings.to_json(),
            "corpus": list(self.corpus),
            "counts": dict(self.counts),
            **({"guided": self.guided} if self.guided is not None else {}),
        }


class SenseInducer:
    """Induce the senses of every verb of a corpus (see the module docstring).

    ``settings`` gives the starting values (default ``InductionSettings()``, the one source of
    every default) and ``params`` override fields of it by name. ``calibration``: a
    ``calibration.json``, its folder or a ``Calibration``, used when the threshold is
    ``"calibrate"``. ``executor``: runs the per-verb tasks (default in-process). ``guide``:
    lemma -> curated senses for guided induction, handed to that verb's task.
    """

    result_: InductionResult
    threshold_: ThresholdChoice

    def __init__(
        self,
        representation: Representation,
        *,
        settings: InductionSettings | None = None,
        calibration: str | Path | Calibration | None = None,
        executor: Executor | None = None,
        cache: VectorCache | None = None,
        guide: Mapping[str, Any] | None = None,
        **params: Any,
    ) -> None:
        self.representation = representation
        self.settings = (settings or InductionSettings()).updated(**params)
        self.calibration = calibration
        self.executor = executor
        self.cache = cache
        self.guide = guide

    def get_params(self, deep: bool = True) -> dict[str, Any]:
        """Constructor parameters (scikit-learn convention; settings fields by name)."""
        params = {f.name: getattr(self.settings, f.name) for f in fields(self.settings)}
        params.update(
            representation=self.representation,
            calibration=self.calibration,
            executor=self.executor,
            cache=self.cache,
            guide=self.guide,
        )
        return params

    def fit(
        self,
        occurrences: Iterable[Occurrence],
        *,
        lemmas: Iterable[str] | None = None,
        corpus: Sequence[str | Path] = (),
        on_calibrated: Callable[[int], None] | None = None,
        on_verb: Callable[[str, int], None] | None = None,
    ) -> SenseInducer:
        """Induce the senses of every verb in ``occurrences`` (or of ``lemmas`` only).

        The occurrences are one partition of ``lexbuild.senses.corpus_induction`` (the CLI
        streams a corpus in shards instead); each verb clusters its ``cap`` occurrences of
        smallest fixed priority and the rest go to the nearest centroid. A calibration run on
        the corpus (threshold ``"calibrate"``, no calibration given) uses every verb's sample,
        ``lemmas`` or not. ``on_calibrated(1)`` is called per pseudo-verb scored,
        ``on_verb(lemma, n)`` after each verb is clustered.
        """
        import shutil
        import tempfile

        from lexbuild.senses.corpus_induction import induce_partitions

        held = list(occurrences)
        wanted = (
            frozenset(unicodedata.normalize("NFC", lemma) for lemma in lemmas)
            if lemmas is not None
            else None
        )
        spool = tempfile.mkdtemp(prefix="lexbuild-assign-")
        try:
            done = induce_partitions(
                [held], self.representation, self.executor or InProcessExecutor(),
                self.settings, spool, calibration=self.calibration, cache=self.cache,
                worker_cache=self.cache, lemmas=wanted, guide=self.guide,
                on_calibrated=on_calibrated, on_verb=on_verb,
            )
            result = result_of(
                done, self.representation, corpus, guide=self.guide, lemmas=wanted
            )
            result.assignments = list(result.assignments)  # before the spool goes
        finally:
            shutil.rmtree(spool, ignore_errors=True)
        self.threshold_ = done.choice
        self.result_ = result
        return self


def result_of(
    run: CorpusInduction,
    representation: Representation,
    corpus: Sequence[str | Path],
    *,
    guide: Mapping[str, Any] | None = None,
    lemmas: Iterable[str] | None = None,
) -> InductionResult:
    """The ``InductionResult`` of a run whose assignments stay in its spool."""
    wanted = None if lemmas is None else frozenset(unicodedata.normalize("NFC", x) for x in lemmas)
    return assemble_result(
        run.results,
        run.assignments,
        settings=run.settings,
        representation=representation,
        run=run.run,
        corpus=corpus,
        occurrences=run.counts,
        skipped_verbs=run.selected - len(run.counts),
        stats=run.stats,
        threshold_source=run.choice.source,
        guided=(
            None
            if guide is None
            else _guided_report(guide, [r.entry for r in run.results], run.counts, wanted)
        ),
    )


def assemble_result(
    results: Sequence[VerbResult],
    assignments: Iterable[Assignment],
    *,
    settings: InductionSettings,
    representation: Representation,
    run: str,
    corpus: Iterable[str | Path],
    occurrences: Mapping[str, int],
    skipped_verbs: int,
    stats: CacheStats,
    threshold_source: str,
    guided: dict[str, Any] | None = None,
) -> InductionResult:
    """One run's result from its verbs' results (in lemma order), wherever they were computed.

    ``occurrences``: occurrences per induced verb (all, not only the clustered sample);
    ``assignments``: a list, or a spool read when the folder is written (never held whole).
    """
    centroids: dict[str, npt.NDArray[np.float32]] = {}
    occurrence_vectors: dict[str, npt.NDArray[np.float32]] = {}
    for result in results:
        centroids.update(result.centroids)
        occurrence_vectors.update(result.occurrence_vectors)
    entries = [result.entry for result in results]
    counts = {
        "verbs": len(entries),
        "senses": sum(len(e.senses) for e in entries),
        "occurrences": sum(occurrences.values()),
        "clustered": sum(min(n, settings.cap) for n in occurrences.values()),
        "skipped_verbs": skipped_verbs,
    }
    return InductionResult(
        entries=entries,
        centroids=centroids,
        occurrence_vectors=occurrence_vectors,
        assignments=assignments,
        settings=settings,
        representation=representation.id,
        model=representation.model,
        representation_settings=representation.settings,
        run=run,
        corpus=[str(p) for p in corpus],
        counts=counts,
        cache=stats,
        threshold_source=threshold_source,
        guided=guided,
    )


def _guided_report(
    guide: Mapping[str, Any],
    entries: Sequence[Entry],
    kept: Mapping[str, int],
    wanted: frozenset[str] | None,
) -> dict[str, Any]:
    """Which induced senses are curated ones (merge keeps their ids) and which curated senses
    found no support in this corpus (reported, never removed)."""
    induced = {sense.id: sense for entry in entries for sense in entry.senses}
    curated: dict[str, int] = {}
    unsupported: list[str] = []
    for lemma in sorted(guide):
        if wanted is not None and lemma not in wanted:
            continue  # a verb this run was not asked to induce
        for sense in guide.get(lemma) or ():
            found = induced.get(sense.id)
            if found is not None and lemma in kept:
                curated[sense.id] = found.induction.cluster_size if found.induction else 0
            else:
                unsupported.append(sense.id)
    return {
        "sources": str(getattr(guide, "source", "")),
        "statuses": list(getattr(guide, "statuses", ())),
        "curated": dict(sorted(curated.items())),
        "unsupported": unsupported,
    }


def induce(
    occurrences: Iterable[Occurrence],
    representation: Representation,
    settings: InductionSettings | None = None,
    *,
    cache: VectorCache | None = None,
    corpus: Sequence[str | Path] = (),
    lemmas: Iterable[str] | None = None,
    on_verb: Callable[[str, int], None] | None = None,
    **params: Any,
) -> InductionResult:
    """``SenseInducer(representation, settings=settings, ...).fit(occurrences).result_``."""
    inducer = SenseInducer(representation, settings=settings, cache=cache, **params)
    return inducer.fit(
        occurrences, lemmas=lemmas, corpus=corpus, on_verb=on_verb
    ).result_

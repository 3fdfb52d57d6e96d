"""``SenseInducer``: sense induction as a scikit-learn-shaped estimator.

Parameters go to ``__init__`` (the representation, then any field of ``InductionSettings`` by
name: ``threshold``, ``clusterer``, ``linkage``, ``random_state``, ``cap``, ``examples`` ...;
plus a calibration file, an executor, a vector cache and a guide); ``fit(occurrences)`` chooses
the threshold (``lexbuild.senses.threshold``), encodes each verb's occurrences, runs
``induce_verb`` on every verb through the executor and keeps the result as data in
``result_`` (an ``InductionResult``) and the threshold choice in ``threshold_``. Nothing is
printed; callbacks serve progress bars. ``lexbuild.senses.induction_folder`` writes the result.

    inducer = SenseInducer(load_representation("static-syntactic"), threshold=0.6)
    result = inducer.fit(occurrences).result_
"""

from __future__ import annotations

import hashlib
import json
import unicodedata
from collections import defaultdict
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field, fields
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt

from lexbuild import __version__
from lexbuild.corpus.occurrences import Occurrence
from lexbuild.errors import InductionError
from lexbuild.lexicon.model import Entry
from lexbuild.senses.calibrate import Calibration
from lexbuild.senses.examples import corpus_name
from lexbuild.senses.executor import Executor, InProcessExecutor
from lexbuild.senses.induce import Assignment, VerbResult, VerbTask, induce_verb
from lexbuild.senses.settings import InductionSettings
from lexbuild.senses.threshold import ThresholdChoice, choose_threshold
from lexbuild.senses.vectors import (
    CacheStats,
    Representation,
    VectorCache,
    encode_cached,
    fingerprint,
)

__all__ = ["InductionResult", "SenseInducer", "induce"]


@dataclass
class InductionResult:
    """What an induction run produced: entries, centroids, assignments and its provenance."""

    entries: list[Entry]
    centroids: dict[str, npt.NDArray[np.float32]]
    assignments: list[Assignment]
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


def _run_id(
    representation: Representation,
    settings: InductionSettings,
    by_lemma: Mapping[str, Sequence[Occurrence]],
) -> str:
    """A content hash of everything the result depends on (never the time)."""
    h = hashlib.sha256()
    h.update(fingerprint(representation).encode())
    h.update(json.dumps(settings.to_json(), sort_keys=True).encode())
    for lemma in sorted(by_lemma):
        h.update(lemma.encode() + b"\x1d")
        for occ in by_lemma[lemma]:
            h.update(f"{corpus_name(occ.source)}\x1f{occ.sentence_id}\x1f{occ.token}\x1f".encode())
            h.update(representation.input_key(occ).encode())
    return "run-" + h.hexdigest()[:16]


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

    def _verb_guide(
        self,
        lemma: str,
        occs: Sequence[Occurrence],
        vectors: npt.NDArray[np.float32],
        settings: InductionSettings,
        stats: CacheStats,
    ) -> Any:
        """The guide of one verb for its task (anchors located, uncited examples parsed)."""
        if self.guide is None:
            return None
        from lexbuild.senses.guide import prepare_verb_guide

        curated = tuple(self.guide.get(lemma) or ())
        if not curated:
            return None
        return prepare_verb_guide(
            curated, occs, vectors, self.representation,
            taken=getattr(self.guide, "taken", ()),
            method=settings.guide_assigner,
            max_distance=settings.guide_max_distance,
            cache=self.cache,
            stats=stats,
        )

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
        on_encoded: Callable[[int], None] | None = None,
        on_verb: Callable[[str, int], None] | None = None,
    ) -> SenseInducer:
        """Induce the senses of every verb in ``occurrences`` (or of ``lemmas`` only).

        A calibration run on the corpus (threshold ``"calibrate"``, no calibration given) uses
        every occurrence given, ``lemmas`` or not. ``on_calibrated(1)`` is called per
        pseudo-verb scored, ``on_encoded(n)`` as vectors are produced (cached or computed),
        ``on_verb(lemma, n)`` after each verb is induced.
        """
        settings = self.settings
        occurrences = list(occurrences)
        wanted = (
            frozenset(unicodedata.normalize("NFC", lemma) for lemma in lemmas)
            if lemmas is not None
            else None
        )
        by_lemma: dict[str, list[Occurrence]] = defaultdict(list)
        for occ in occurrences:
            if wanted is None or occ.lemma in wanted:
                by_lemma[occ.lemma].append(occ)
        kept = {
            lemma: occs
            for lemma, occs in sorted(by_lemma.items())
            if len(occs) >= settings.min_occurrences
        }
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
        if self.guide is not None and not isinstance(self.guide, Mapping):
            raise InductionError("guide must map each lemma to its curated senses")
        stats = CacheStats()
        choice = choose_threshold(
            occurrences,
            self.representation,
            settings,
            self.calibration,
            cache=self.cache,
            stats=stats,
            progress=on_calibrated,
        )
        resolved = settings.with_threshold(choice.value)
        run = _run_id(self.representation, resolved, kept)
        executor = self.executor or InProcessExecutor()

        def tasks() -> Iterator[VerbTask]:
            # Lazily: one verb's vectors are computed when the executor asks for its task.
            for lemma, occs in kept.items():
                vectors = encode_cached(
                    self.representation, occs, self.cache, stats=stats, progress=on_encoded
                )
                yield VerbTask(
                    lemma=lemma,
                    occurrences=occs,
                    vectors=vectors,
                    settings=resolved,
                    representation=self.representation.id,
                    model=self.representation.model,
                    run=run,
                    guide=self._verb_guide(lemma, occs, vectors, resolved, stats),
                )

        results: list[VerbResult] = []
        for result in executor.map(induce_verb, tasks()):
            results.append(result)
            if on_verb is not None:
                on_verb(result.entry.lemma, len(result.assignments))
        entries = [result.entry for result in results]
        self.threshold_ = choice
        self.result_ = assemble_result(
            results,
            settings=resolved,
            representation=self.representation,
            run=run,
            corpus=corpus,
            occurrences={lemma: len(occs) for lemma, occs in kept.items()},
            skipped_verbs=len(by_lemma) - len(kept),
            stats=stats,
            threshold_source=choice.source,
            guided=(
                None if self.guide is None else _guided_report(self.guide, entries, kept, wanted)
            ),
        )
        return self


def assemble_result(
    results: Sequence[VerbResult],
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

    ``occurrences``: occurrences per induced verb (all, not only the clustered sample).
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
        assignments=[a for result in results for a in result.assignments],
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
    kept: Mapping[str, Sequence[Occurrence]],
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
    on_encoded: Callable[[int], None] | None = None,
    **params: Any,
) -> InductionResult:
    """``SenseInducer(representation, settings=settings, ...).fit(occurrences).result_``."""
    inducer = SenseInducer(representation, settings=settings, cache=cache, **params)
    return inducer.fit(
        occurrences, lemmas=lemmas, corpus=corpus, on_encoded=on_encoded, on_verb=on_verb
    ).result_

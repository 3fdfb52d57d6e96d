"""Sense induction of one verb, in pure functions an executor may run anywhere.

A verb is induced in three steps, so that no step holds more than ``cap`` of its occurrences:

1. ``fit_verb``: a ``VerbTask`` holds the verb's sample (at most ``cap`` occurrences, drawn
   while reading by ``lexbuild.senses.reservoir``, in increasing priority) and their vectors;
   the sample is clustered. The result, a ``VerbModel``, keeps per cluster its centroid, a few
   member vectors for review, and its sampled members as example candidates (sentence text,
   spans and slots only); its ``VerbAssigner`` (the sample's labels and the centroids) is all
   that reading the corpus again needs.
2. Every occurrence of the verb is labelled: a sampled one keeps its cluster, any other goes to
   the nearest centroid (``assign_vectors``), and a ``LabelTally`` counts the members and
   their slot patterns per cluster (integers: tallies of shards add up in any order).
3. ``finish_verb``: clusters become draft senses numbered by size, largest first (ties: the
   cluster met first in the sample), with frames counted over all members
   (``frames_from_counts``) and up to ``examples`` examples chosen among the sampled members
   (``lexbuild.senses.examples``). A sense's centroid is the mean of its sampled members.
"""

from __future__ import annotations

import itertools
import zlib
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.corpus.valency import FrameThresholds, frames_from_patterns
from lexbuild.errors import InductionError
from lexbuild.lexicon.ids import entry_id, sense_id
from lexbuild.lexicon.model import Entry, Frame, Induction, Sense, Slot, Status
from lexbuild.senses.clustering import assign_to_centroids
from lexbuild.senses.examples import choose_examples
from lexbuild.senses.registry import get_clusterer
from lexbuild.senses.reservoir import occurrence_priority, occurrence_ref
from lexbuild.senses.settings import InductionSettings

__all__ = [
    "Assignment",
    "LabelTally",
    "VerbAssigner",
    "VerbModel",
    "VerbResult",
    "VerbTask",
    "assign_vectors",
    "finish_verb",
    "fit_verb",
    "frames_from_counts",
    "sample_indices",
    "sample_rows",
]

Ref = tuple[str, str, int]  # (corpus, sentence id, 0-based token): lexbuild.senses.reservoir


@dataclass(frozen=True)
class Assignment:
    """One clustered occurrence: its verb, sense, corpus file, sentence and 1-based token id."""

    lemma: str
    sense: str
    corpus: str
    sent_id: str
    token: int


@dataclass(frozen=True)
class VerbTask:
    """What ``fit_verb`` and ``finish_verb`` need of one verb (picklable).

    ``occurrences`` and ``vectors``: the verb's sample (empty where only settings are needed).
    ``guide``: the verb's prepared guide (``guide.VerbGuide``), whose curated senses take the
    sampled occurrences near them before the rest is clustered; ``None``: unguided.
    """

    lemma: str
    occurrences: Sequence[Occurrence]
    vectors: npt.NDArray[np.float32]
    settings: InductionSettings  # threshold resolved to a number
    representation: str
    model: str | None
    run: str
    guide: Any = None


@dataclass(frozen=True)
class VerbAssigner:
    """What labelling the verb's occurrences needs: the sample's labels, the centroids."""

    lemma: str
    labels: dict[Ref, int]  # sampled occurrence -> its cluster
    centroids: npt.NDArray[np.float32]  # one L2-normalised row per cluster with members
    centroid_labels: npt.NDArray[np.intp]  # the cluster label of each row


@dataclass(frozen=True)
class SampledCluster:
    """One cluster of the sample."""

    first: int  # position of its first member in the sample (ties of size)
    centroid: npt.NDArray[np.float32]
    vectors: npt.NDArray[np.float32]  # up to OCCURRENCE_SAMPLE members, for review
    candidates: tuple[Occurrence, ...]  # its sampled members, for the examples
    similarity: tuple[float, ...]  # cosine of each candidate to the centroid


@dataclass(frozen=True)
class VerbModel:
    lemma: str
    assigner: VerbAssigner
    clusters: dict[int, SampledCluster]
    curated: dict[int, str] = field(default_factory=dict)  # label -> curated sense id
    taken: frozenset[str] = frozenset()  # ids a new sense never takes


@dataclass
class LabelTally:
    """Members and slot patterns per cluster label, over every occurrence of a verb."""

    sizes: Counter[int] = field(default_factory=Counter)
    patterns: dict[int, Counter[tuple[Slot, ...]]] = field(default_factory=dict)

    def add(self, label: int, slots: tuple[Slot, ...]) -> None:
        self.sizes[label] += 1
        counter = self.patterns.get(label)
        if counter is None:
            counter = self.patterns[label] = Counter()
        counter[slots] += 1

    def merge(self, other: LabelTally) -> LabelTally:
        self.sizes.update(other.sizes)
        for label, counter in other.patterns.items():
            self.patterns.setdefault(label, Counter()).update(counter)
        return self


@dataclass(frozen=True)
class VerbResult:
    entry: Entry
    centroids: dict[str, npt.NDArray[np.float32]]
    sense_of_label: dict[int, str]  # cluster label -> sense id
    # Up to OCCURRENCE_SAMPLE member vectors per sense, for the review site's projection.
    occurrence_vectors: dict[str, npt.NDArray[np.float32]] = field(default_factory=dict)


def sample_indices(n: int, cap: int, lemma: str, random_state: int) -> npt.NDArray[np.intp]:
    """All of ``range(n)`` up to ``cap``, else a random sample of ``cap`` rows (sorted), drawn
    from ``random_state`` and the lemma (curated calibration's samples of a verb's rows)."""
    if n <= cap:
        return np.arange(n, dtype=np.intp)
    rng = np.random.default_rng([random_state, zlib.crc32(lemma.encode("utf-8"))])
    return np.sort(rng.choice(n, cap, replace=False)).astype(np.intp)


def sample_rows(
    occurrences: Sequence[Occurrence], cap: int, random_state: int
) -> npt.NDArray[np.intp]:
    """Rows of the occurrences a verb clusters, in the order it clusters them: the ``cap``
    smallest fixed priorities (``lexbuild.senses.reservoir``), by increasing priority."""
    keyed = sorted(
        ((occurrence_priority(random_state, occ), occurrence_ref(occ)), row)
        for row, occ in enumerate(occurrences)
    )
    return np.asarray([row for _, row in keyed[:cap]], dtype=np.intp)


def frames_from_counts(
    patterns: Counter[tuple[Slot, ...]], parent: str, settings: InductionSettings
) -> list[Frame]:
    """The frames of one sense from its slot patterns counted over all its members."""
    thresholds = FrameThresholds(
        min_count=settings.frame_min_count, min_share=settings.frame_min_share
    )
    # A small sense where no pattern reaches the noise thresholds keeps its patterns all
    # (flagged for the editor) rather than go without a frame.
    return frames_from_patterns(
        patterns, parent_id=parent, thresholds=thresholds
    ) or frames_from_patterns(
        patterns, parent_id=parent, thresholds=FrameThresholds(min_count=1, min_share=0.0)
    )


def _cluster(
    task: VerbTask, Xn: npt.NDArray[np.float32]
) -> tuple[npt.NDArray[np.intp], dict[int, str]]:
    """A cluster label for every sampled occurrence; with a guide, the curated sense id of each
    label that is a curated sense."""
    settings = task.settings
    spec = get_clusterer(settings.clusterer)
    if task.guide is not None:
        from lexbuild.senses.guide import cluster_guided

        return cluster_guided(
            task.guide, Xn, float(settings.threshold), lambda t: spec.make(settings, t),
            min_cluster_size=settings.min_cluster_size, cap=None,
            random_state=settings.random_state,
        )
    clusterer = spec.make(settings, float(settings.threshold)).fit(Xn)
    return np.asarray(clusterer.labels_, dtype=np.intp), {}


def _normalised(vectors: npt.ArrayLike) -> npt.NDArray[np.float32]:
    X = np.asarray(vectors, dtype=np.float32)
    norms = np.linalg.norm(X, axis=1, keepdims=True)
    norms[norms == 0] = 1.0
    return (X / norms).astype(np.float32)


def _candidate(occ: Occurrence) -> Occurrence:
    # What example choice reads of an occurrence: text, words, spans, slots; not the lemmas of
    # every word nor the oblique evidence.
    return replace(occ, lemmas=(), obliques=())


def fit_verb(task: VerbTask) -> VerbModel:
    """Cluster one verb's sample (``task.occurrences``, at most ``cap``, see the module doc)."""
    settings = task.settings
    if settings.calibrates:
        raise InductionError("fit_verb needs a numeric threshold (resolve it first)")
    occs = task.occurrences
    Xn = _normalised(task.vectors)
    labels, curated = _cluster(task, Xn)
    clusters: dict[int, SampledCluster] = {}
    # Only clusters with members attract the rest (a curated sense may have none).
    for cluster in range(int(labels.max()) + 1):
        members = np.flatnonzero(labels == cluster)
        if not members.size:
            continue
        total = Xn[members].astype(np.float64).sum(axis=0)
        centroid = (total / max(float(np.linalg.norm(total)), 1e-12)).astype(np.float32)
        clusters[cluster] = SampledCluster(
            first=int(members[0]),
            centroid=centroid,
            vectors=Xn[members[_spread(members.size, OCCURRENCE_SAMPLE)]],
            candidates=tuple(_candidate(occs[int(i)]) for i in members),
            similarity=tuple((Xn[members] @ centroid).tolist()),
        )
    return VerbModel(
        lemma=task.lemma,
        assigner=VerbAssigner(
            lemma=task.lemma,
            labels={occurrence_ref(occ): int(label) for occ, label in zip(occs, labels,
                                                                             strict=True)},
            centroids=np.stack([c.centroid for c in clusters.values()]),
            centroid_labels=np.asarray(list(clusters), dtype=np.intp),
        ),
        clusters=clusters,
        curated=curated,
        taken=frozenset(getattr(task.guide, "taken", ())),
    )


def assign_vectors(assigner: VerbAssigner, vectors: npt.ArrayLike) -> npt.NDArray[np.intp]:
    """Labels of occurrences beyond the sample: the nearest cluster centroid (cosine)."""
    rows = assign_to_centroids(_normalised(vectors), assigner.centroids)
    return assigner.centroid_labels[rows]


def finish_verb(model: VerbModel, tally: LabelTally, task: VerbTask) -> VerbResult:
    """The entry of one verb: its clusters as draft senses, numbered by size over all the
    occurrences (``tally``), with frames counted over all of them and examples chosen among
    the sampled members."""
    settings = task.settings
    eid = entry_id(task.lemma)
    # New senses never take a curated, retired or otherwise used id.
    taken = set(model.taken) | set(model.curated.values())
    fresh = (sense_id(eid, n) for n in itertools.count(1))
    order = sorted(
        (c for c in model.clusters if tally.sizes.get(c, 0)),
        key=lambda c: (-tally.sizes[c], model.clusters[c].first),
    )
    senses: list[Sense] = []
    centroids: dict[str, npt.NDArray[np.float32]] = {}
    samples: dict[str, npt.NDArray[np.float32]] = {}
    sense_of_label: dict[int, str] = {}
    for cluster in order:
        sid = model.curated.get(cluster) or next(i for i in fresh if i not in taken)
        sense_of_label[cluster] = sid
        sampled = model.clusters[cluster]
        centroids[sid] = sampled.centroid
        samples[sid] = sampled.vectors
        frames = frames_from_counts(tally.patterns[cluster], sid, settings)
        examples = choose_examples(
            sampled.candidates, sampled.similarity, frames, sid, k=settings.examples,
            words=settings.example_words,
        )
        flags = []
        if frames and all((f.frequency or 0) < settings.frame_min_count for f in frames):
            flags.append("frames below the noise thresholds: check them")
        senses.append(
            Sense(
                id=sid,
                status=Status.DRAFT,
                frames=frames,
                examples=examples,
                flags=flags,
                induction=Induction(
                    cluster_size=int(tally.sizes[cluster]),
                    threshold=float(settings.threshold),
                    representation=task.representation,
                    model=task.model,
                    centroid=sid,
                    run=task.run,
                ),
            )
        )
    entry = Entry(id=eid, lemma=task.lemma, pos="VERB", senses=senses)
    return VerbResult(entry, centroids, sense_of_label, samples)


#: Member vectors kept per sense for the review site (evenly spread over the sense's members).
OCCURRENCE_SAMPLE = 60


def _spread(n: int, k: int) -> npt.NDArray[np.intp]:
    """``min(n, k)`` indices spread evenly over ``range(n)`` (deterministic)."""
    if n <= k:
        return np.arange(n, dtype=np.intp)
    return np.linspace(0, n - 1, k).round().astype(np.intp)

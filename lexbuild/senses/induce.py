"""Sense induction of one verb: a pure function from a task to its result.

``induce_verb`` takes a ``VerbTask`` (the verb's occurrences, their vectors, the settings with
the threshold resolved, the run id) and returns a ``VerbResult`` (the entry with draft senses,
their centroids, the assignment of every occurrence). It reads no file and keeps no state, so an
executor may run it anywhere (``lexbuild.senses.executor``); ``SenseInducer`` prepares the tasks.

Per verb: at most ``cap`` occurrences (a random sample) are clustered; every occurrence is then
assigned to its nearest sense centroid (the sampled ones keep their cluster). Senses are
numbered by size, largest first. Each sense gets its frames (``valency.frames_for``) and up to
``examples`` example sentences (``lexbuild.senses.examples``).
"""

from __future__ import annotations

import itertools
import zlib
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.corpus.valency import FrameThresholds, frames_for
from lexbuild.errors import InductionError
from lexbuild.lexicon.ids import entry_id, sense_id
from lexbuild.lexicon.model import Entry, Frame, Induction, Sense, Status
from lexbuild.senses.clustering import assign_to_centroids
from lexbuild.senses.examples import choose_examples, corpus_name
from lexbuild.senses.registry import get_clusterer
from lexbuild.senses.settings import InductionSettings

__all__ = [
    "Assignment",
    "VerbResult",
    "VerbTask",
    "induce_verb",
    "sample_indices",
]


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
    """Everything ``induce_verb`` needs for one verb (picklable).

    ``guide``: curated senses of this verb whose occurrences are assigned before clustering
    (guided induction); ``None`` for unguided induction.
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
class VerbResult:
    entry: Entry
    centroids: dict[str, npt.NDArray[np.float32]]
    assignments: list[Assignment]
    # Up to OCCURRENCE_SAMPLE member vectors per sense, for the review site's projection.
    occurrence_vectors: dict[str, npt.NDArray[np.float32]] = field(default_factory=dict)


def sample_indices(n: int, cap: int, lemma: str, random_state: int) -> npt.NDArray[np.intp]:
    """The occurrences of a verb that are clustered: all up to ``cap``, else a random sample."""
    if n <= cap:
        return np.arange(n, dtype=np.intp)
    rng = np.random.default_rng([random_state, zlib.crc32(lemma.encode("utf-8"))])
    return np.sort(rng.choice(n, cap, replace=False)).astype(np.intp)


def _frames(occs: Sequence[Occurrence], parent: str, settings: InductionSettings) -> list[Frame]:
    thresholds = FrameThresholds(
        min_count=settings.frame_min_count, min_share=settings.frame_min_share
    )
    frames = frames_for(occs, parent_id=parent, thresholds=thresholds)
    if not frames:
        # A small sense where no pattern reaches the noise thresholds: keep its patterns all
        # (flagged for the editor) rather than leave the sense without a frame.
        frames = frames_for(
            occs, parent_id=parent, thresholds=FrameThresholds(min_count=1, min_share=0.0)
        )
    return frames


def _cluster(
    task: VerbTask, Xn: npt.NDArray[np.float32]
) -> tuple[npt.NDArray[np.intp], dict[int, str]]:
    """A cluster label for every occurrence: a sample is clustered, the rest assigned; with a
    guide, the curated sense id of each label that is a curated sense."""
    settings = task.settings
    spec = get_clusterer(settings.clusterer)
    if task.guide is not None:
        from lexbuild.senses.guide import cluster_guided

        return cluster_guided(
            task.guide, Xn, float(settings.threshold), lambda t: spec.make(settings, t),
            min_cluster_size=settings.min_cluster_size, cap=settings.cap,
            random_state=settings.random_state,
        )
    sample = sample_indices(len(task.occurrences), settings.cap, task.lemma, settings.random_state)
    clusterer = spec.make(settings, float(settings.threshold)).fit(Xn[sample])
    labels = assign_to_centroids(Xn, clusterer.centroids_)
    labels[sample] = clusterer.labels_  # sampled occurrences keep their own cluster
    return labels, {}


def induce_verb(task: VerbTask) -> VerbResult:
    """The senses of one verb (see the module docstring)."""
    settings = task.settings
    if settings.calibrates:
        raise InductionError("induce_verb needs a numeric threshold (resolve it first)")
    occs = task.occurrences
    X = np.asarray(task.vectors, dtype=np.float32)
    norms = np.linalg.norm(X, axis=1, keepdims=True)
    norms[norms == 0] = 1.0
    Xn = (X / norms).astype(np.float32)
    eid = entry_id(task.lemma)
    labels, curated = _cluster(task, Xn)
    # New senses never take a curated, retired or otherwise used id.
    taken = set(getattr(task.guide, "taken", ())) | set(curated.values())
    fresh = (sense_id(eid, n) for n in itertools.count(1))
    k = int(labels.max()) + 1
    sizes = np.bincount(labels, minlength=k)
    first_seen = [int(np.flatnonzero(labels == c)[0]) if sizes[c] else len(occs) for c in range(k)]
    order = sorted((c for c in range(k) if sizes[c]), key=lambda c: (-sizes[c], first_seen[c]))
    senses: list[Sense] = []
    centroids: dict[str, npt.NDArray[np.float32]] = {}
    samples: dict[str, npt.NDArray[np.float32]] = {}
    sense_of_cluster: dict[int, str] = {}
    for cluster in order:
        sid = curated.get(cluster) or next(i for i in fresh if i not in taken)
        sense_of_cluster[cluster] = sid
        members = np.flatnonzero(labels == cluster)
        centroid = Xn[members].astype(np.float64).sum(axis=0)
        centroid /= max(float(np.linalg.norm(centroid)), 1e-12)
        centroids[sid] = centroid.astype(np.float32)
        samples[sid] = Xn[members[_spread(members.size, OCCURRENCE_SAMPLE)]]
        member_occs = [occs[int(i)] for i in members]
        frames = _frames(member_occs, sid, settings)
        similarity = (Xn[members] @ centroid).tolist()
        examples = choose_examples(
            member_occs, similarity, frames, sid, k=settings.examples,
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
                    cluster_size=int(members.size),
                    threshold=float(settings.threshold),
                    representation=task.representation,
                    model=task.model,
                    centroid=sid,
                    run=task.run,
                ),
            )
        )
    assignments = [
        Assignment(task.lemma, sense_of_cluster[int(label)], corpus_name(occ.source),
                   occ.sentence_id, occ.token + 1)
        for occ, label in zip(occs, labels, strict=True)
    ]
    entry = Entry(id=eid, lemma=task.lemma, pos="VERB", senses=senses)
    return VerbResult(entry, centroids, assignments, samples)


#: Member vectors kept per sense for the review site (evenly spread over the sense's members).
OCCURRENCE_SAMPLE = 60


def _spread(n: int, k: int) -> npt.NDArray[np.intp]:
    """``min(n, k)`` indices spread evenly over ``range(n)`` (deterministic)."""
    if n <= k:
        return np.arange(n, dtype=np.intp)
    return np.linspace(0, n - 1, k).round().astype(np.intp)

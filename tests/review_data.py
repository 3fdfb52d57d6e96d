"""Inputs for the review site tests: an induction folder and a calibration folder written by
the project's own writers (``write_induction``, ``write_calibration``) from small hand-made
results, and the occurrence vectors of each induced sense as well-separated random blobs."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from lexbuild.lexicon.model import Induction, Lexicon
from lexbuild.review import OCCURRENCE_VECTORS_FILE, occurrence_vectors_bytes
from lexbuild.senses.calibrate import Calibration, ThresholdScores, write_calibration
from lexbuild.senses.induce import Assignment
from lexbuild.senses.inducer import InductionResult
from lexbuild.senses.induction_folder import write_induction
from lexbuild.senses.settings import InductionSettings

#: Verbs given an induction (their senses become the induced senses, sizes 12, 9, 6, ...).
INDUCED_LEMMAS = ("compter", "donner", "passer")
CHOSEN_THRESHOLD = 0.55


def cluster_size(rank: int) -> int:
    return max(12 - 3 * rank, 3)


def write_test_induction(lexicon: Lexicon, folder: Path, *, vectors: bool = True) -> Path:
    rng = np.random.RandomState(7)
    entries, centroids, assignments, occurrence_vectors = [], {}, [], {}
    for entry in lexicon.entries:
        if entry.lemma not in INDUCED_LEMMAS:
            continue
        senses = []
        for rank, sense in enumerate(entry.senses):
            size = cluster_size(rank)
            senses.append(sense.model_copy(update={"induction": Induction(
                cluster_size=size, threshold=CHOSEN_THRESHOLD, representation="static-syntactic",
                centroid=sense.id, run="test-run")}))
            centre = rng.normal(size=16) * 4
            occurrence_vectors[sense.id] = (centre + rng.normal(size=(size, 16))).astype(
                np.float32)
            centroids[sense.id] = (centre / np.linalg.norm(centre)).astype(np.float32)
            assignments += [Assignment(entry.lemma, sense.id, "brevenn.conllu",
                                       f"{sense.id}.{n}", 2) for n in range(size)]
        entries.append(entry.model_copy(update={"senses": senses}))
    result = InductionResult(
        entries=entries, centroids=centroids, assignments=assignments,
        settings=InductionSettings(threshold=CHOSEN_THRESHOLD), representation="static-syntactic",
        model="fr_core_news_md-3.8.0", representation_settings={}, run="test-run",
        corpus=["brevenn.conllu"], counts={"occurrences": len(assignments)},
    )
    write_induction(result, folder)
    if vectors:
        (folder / OCCURRENCE_VECTORS_FILE).write_bytes(occurrence_vectors_bytes(
            occurrence_vectors))
    return folder


def write_occurrence_vectors_from_cache(induced: Path, corpus: Path, cache: Path) -> int:
    """Recompute the demo's occurrence vectors (all hits in its vector cache) and store them
    per induced sense, as the 2-D projection expects; returns how many occurrences."""
    from collections import defaultdict

    from lexbuild.corpus.conllu import read_sentences
    from lexbuild.corpus.occurrences import extract_occurrences, profile_for
    from lexbuild.senses.induction_folder import read_assignments
    from lexbuild.senses.vectors import StaticSyntacticVectors, VectorCache, encode_cached

    assigned = read_assignments(induced)  # (sentence id, 1-based word id) -> (lemma, sense)
    occurrences = [
        occ for sentence in read_sentences(corpus)
        for occ in extract_occurrences(sentence, profile_for("fr"))
        if assigned.get((occ.sentence_id, occ.token + 1), ("",))[0] == occ.lemma
    ]
    with VectorCache(cache) as vectors:
        matrix = encode_cached(StaticSyntacticVectors(), occurrences, vectors)
    groups: dict[str, list[np.ndarray]] = defaultdict(list)
    for occ, row in zip(occurrences, matrix, strict=True):
        groups[assigned[(occ.sentence_id, occ.token + 1)][1]].append(row)
    (induced / OCCURRENCE_VECTORS_FILE).write_bytes(occurrence_vectors_bytes(
        {sense: np.array(rows) for sense, rows in groups.items()}))
    return len(occurrences)


def write_test_calibration(folder: Path) -> Path:
    rows = [
        ThresholdScores(threshold=t, ari=ari, bcubed_f1=0.5 + ari / 2, paired_f1=0.4 + ari / 2,
                        v_measure=0.3 + ari / 2, clusters_per_verb=6 - 5 * t)
        for t, ari in ((0.35, 0.2), (0.45, 0.45), (0.55, 0.6), (0.65, 0.5), (0.75, 0.3))
    ]
    best = max(rows, key=lambda row: row.ari)
    write_calibration(Calibration("static-syntactic", "fr_core_news_md-3.8.0", {}, rows, best),
                      folder, plot=False)
    return folder

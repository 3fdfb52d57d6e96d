"""Threshold calibration on pseudo-verbs built from the UD French treebanks in ../shared."""

from __future__ import annotations

import json
from collections import Counter
from pathlib import Path

import numpy as np
import pytest

from lexbuild.corpus.occurrences import Occurrence, iter_occurrences
from lexbuild.errors import InductionError
from lexbuild.senses.calibrate import (
    Calibration,
    build_pseudo_verbs,
    calibrate,
    conflate,
    read_calibration,
    write_calibration,
)
from lexbuild.senses.vectors import StaticSyntacticVectors

#: Floor for the recommended threshold's mean ARI. Measured with these settings on the five
#: French files: 0.364 (random_state 0); random states 1 and 2 gave 0.329 and 0.270. The
#: issue asks for a floor of at least 0.15.
ARI_FLOOR = 0.22
SWEEP = [0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 2.0]


@pytest.fixture(scope="module")
def occurrences(ud_dir: Path) -> list[Occurrence]:
    return list(iter_occurrences(sorted(ud_dir.glob("fr_*.conllu"))))


@pytest.fixture(scope="module")
def calibration(occurrences: list[Occurrence]) -> Calibration:
    return calibrate(
        occurrences,
        StaticSyntacticVectors(),
        pairs=10,
        matched_pairs=5,
        triples=3,
        per_verb=80,
        thresholds=SWEEP,
    )


def test_recommended_threshold_beats_the_floor(calibration: Calibration) -> None:
    best = calibration.recommended
    assert best.ari >= ARI_FLOOR
    assert best.ari == max(row.ari for row in calibration.thresholds)
    assert 1.5 <= best.clusters_per_verb <= 8
    assert len(calibration.pseudo_verbs) == 18


def test_one_cluster_baseline(calibration: Calibration) -> None:
    # At a cut above every cosine distance (max 2), each pseudo-verb is one cluster: ARI 0 by
    # definition (Hubert and Arabie 1985), while B-cubed F1 stays high, which is why the
    # recommendation goes by ARI.
    top = calibration.thresholds[-1]
    assert top.threshold == 2.0 and top.clusters_per_verb == 1.0
    assert top.ari == pytest.approx(0.0, abs=1e-12)
    assert top.bcubed_f1 >= calibration.recommended.bcubed_f1 - 0.05


def test_pseudo_verbs_are_deterministic_and_well_formed() -> None:
    counts = Counter({f"verbe{i}": 100 - i for i in range(12)} | {"rare": 3})
    a = build_pseudo_verbs(
        counts, pairs=8, matched_pairs=4, triples=3, min_count=30, random_state=7
    )
    assert a == build_pseudo_verbs(
        counts, pairs=8, matched_pairs=4, triples=3, min_count=30, random_state=7
    )
    assert [p.kind for p in a] == ["pair"] * 8 + ["matched-pair"] * 4 + ["triple"] * 3
    assert len({p.verbs for p in a}) == len(a)  # no combination twice
    assert all("rare" not in p.verbs for p in a)
    assert all(len(set(p.verbs)) == len(p.verbs) for p in a)
    for p in a:
        if p.kind == "matched-pair":  # neighbours in the frequency ranking
            ranks = sorted(int(v.removeprefix("verbe")) for v in p.verbs)
            assert ranks[1] - ranks[0] == 1
    with pytest.raises(InductionError, match="at least 2 verbs"):
        build_pseudo_verbs({"seul": 500}, min_count=30)


def test_conflation_hides_the_verb(occurrences: list[Occurrence]) -> None:
    by_lemma: dict[str, list[Occurrence]] = {}
    for occ in occurrences:
        by_lemma.setdefault(occ.lemma, []).append(occ)
    pseudo = build_pseudo_verbs({"prendre": 97, "donner": 59}, pairs=1, matched_pairs=0, triples=0)[
        0
    ]
    occs, gold = conflate(by_lemma, pseudo, per_verb=40, placeholder="[MASK]")
    assert Counter(gold) == {"donner": 40, "prendre": 40}
    originals = {(o.sentence_id, o.token): o for o in occurrences}
    for occ in occs:
        original = originals[(occ.sentence_id, occ.token)]
        assert occ.lemma == pseudo.name
        assert occ.words[occ.token] == "[MASK]" and occ.lemmas[occ.token] == "[MASK]"
        assert original.lemma not in occ.lemmas[occ.token]
        start, end = occ.char_span
        assert occ.text[start:end] == "[MASK]"
        # Argument spans still cover the same words after the text was rewritten.
        for new, old in zip(occ.arguments, original.arguments, strict=True):
            if old.span[0] >= 0 and (
                old.span[0] >= original.char_span[1] or old.span[1] <= original.char_span[0]
            ):
                assert (
                    occ.text[new.span[0] : new.span[1]] == original.text[old.span[0] : old.span[1]]
                )
    unmasked, _ = conflate(by_lemma, pseudo, per_verb=40, mask=False)
    assert all(o.words == originals[(o.sentence_id, o.token)].words for o in unmasked)


def test_written_files(tmp_path: Path, calibration: Calibration) -> None:
    import matplotlib.image

    path = write_calibration(calibration, tmp_path / "cal")
    data = json.loads(path.read_text(encoding="utf-8"))
    assert data["representation"] == "static-syntactic"
    assert set(data["recommended"]) == {"threshold", "ari"}
    assert [row["threshold"] for row in data["thresholds"]] == SWEEP
    assert set(data["thresholds"][0]) == {
        "threshold",
        "ari",
        "bcubed_f1",
        "paired_f1",
        "v_measure",
        "clusters_per_verb",
    }
    # The plot is a real PNG (matplotlib reads it back) and the same calibration gives the
    # same bytes.
    png = tmp_path / "cal" / "calibration.png"
    image = matplotlib.image.imread(png)
    assert image.ndim == 3 and image.shape[0] > 100
    first = png.read_bytes()
    write_calibration(calibration, tmp_path / "cal")
    assert png.read_bytes() == first
    assert read_calibration(tmp_path / "cal")["recommended"]["threshold"] == (
        calibration.recommended.threshold
    )


def test_unreadable_calibration(tmp_path: Path) -> None:
    bad = tmp_path / "calibration.json"
    bad.write_text('{"recommended": {}}')
    with pytest.raises(InductionError, match=r"recommended\.threshold"):
        read_calibration(bad)
    bad.write_text("{not json")
    with pytest.raises(InductionError, match=r"calibration.json:1"):
        read_calibration(bad)


def test_per_verb_curves_match_the_means(calibration: Calibration) -> None:
    curves = np.array(list(calibration.per_verb_ari.values()))
    means = [row.ari for row in calibration.thresholds]
    np.testing.assert_allclose(curves.mean(axis=0), means)


@pytest.mark.parametrize("exact_max", [20000, 50])
def test_sweep_equals_one_fit_per_threshold(exact_max: int) -> None:
    # The calibration cuts one tree at every threshold; each cut must be what a fresh fit at
    # that threshold gives (exact path; the two-stage path above exact_max refits).
    from lexbuild.senses.agglomerative import AgglomerativeClusterer as SenseClusterer

    rng = np.random.default_rng(3)
    centres = rng.normal(size=(4, 24))
    X = centres[rng.integers(0, 4, size=120)] + 0.8 * rng.normal(size=(120, 24))
    grid = [0.2, 0.4, 0.6, 0.8, 1.0]
    swept = SenseClusterer(exact_max=exact_max, n_micro=30).sweep(X, grid)
    for t, labels in zip(grid, swept, strict=True):
        fitted = SenseClusterer(threshold=t, exact_max=exact_max, n_micro=30).fit(X).labels_
        np.testing.assert_array_equal(labels, fitted)
    assert len({len(set(labels.tolist())) for labels in swept}) > 1  # the cuts differ


def test_a_per_verb_sample_with_corpus_frequencies_builds_the_same_pseudo_verbs(
    occurrences: list[Occurrence], calibration: Calibration
) -> None:
    """``lexbuild calibrate`` reads the corpus into reservoirs of per_verb occurrences per verb
    (memory constant in corpus size); with the corpus frequencies beside the sample, the
    pseudo-verbs (matched by frequency) are those of the whole corpus, and the recommended
    threshold still clears the floor measured on the whole corpus."""
    from lexbuild.senses.reservoir import sample_corpus

    sample = sample_corpus(occurrences, 80, 0)
    held = [occ for _lemma, occs in sample.iter_samples() for occ in occs]
    assert max(Counter(o.lemma for o in held).values()) == 80 < len(occurrences) // 20
    from_sample = calibrate(
        held, StaticSyntacticVectors(), counts=sample.counts, pairs=10, matched_pairs=5,
        triples=3, per_verb=80, thresholds=SWEEP,
    )
    def verbs(c: Calibration) -> list[tuple[str, ...]]:
        return [tuple(p["verbs"]) for p in c.pseudo_verbs]

    assert verbs(from_sample) == verbs(calibration)
    # Without the frequencies every frequent verb looks 80-frequent: other matched pairs.
    flattened = calibrate(
        held, StaticSyntacticVectors(), pairs=10, matched_pairs=5, triples=3, per_verb=80,
        thresholds=SWEEP,
    )
    assert verbs(flattened) != verbs(calibration)
    assert from_sample.recommended.ari >= ARI_FLOOR
